"""``robustff excursions``: how each feedforward design fares as a throughput change grows."""

from __future__ import annotations

import argparse
import csv
import io
import json
import math
from pathlib import Path

from robustff import CAUTION
from robustff.cli.arguments import positive_int, sample_count, seed_value
from robustff.cli.exit_codes import EXIT_OK
from robustff.jsonvalues import json_safe

__all__ = ["register", "execute", "fraction_list"]


def fraction_list(text: str) -> list[float]:
    """``"0.1,0.2,0.4"`` as fractions, each > 0 and finite."""
    try:
        values = [float(part) for part in text.split(",") if part.strip()]
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected fractions such as 0.1,0.2,0.4, got {text!r}"
                                         ) from None
    if not values or any(not (math.isfinite(v) and v > 0.0) for v in values):
        raise argparse.ArgumentTypeError(f"every fraction must be a number > 0 (0.4 means 40 "
                                         f"%), got {text!r}")
    return values


def register(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "excursions", help="rerun a balance plant's study at growing throughput changes",
        description="For a plant built from balances: scale the case's events on one input "
                    "so that the first moves it by each fraction of its operating value, run "
                    "the study at each (same plants and noise) and show every design's IAE "
                    "ratio and probability of harm against the excursion.",
    )
    parser.add_argument("case", metavar="CASE.toml", help="case file with a balance plant")
    parser.add_argument("--input", required=True, metavar="NAME",
                        help="the disturbance input to move (e.g. wild_flow, process_flow)")
    parser.add_argument("--fractions", type=fraction_list, default=[0.1, 0.2, 0.4],
                        metavar="F,F,...",
                        help="excursions as fractions of the operating value (default "
                             "0.1,0.2,0.4)")
    parser.add_argument("--samples", type=sample_count,
                        help="perturbed plants per excursion (default: the case's)")
    parser.add_argument("--seed", type=seed_value, help="random seed (default: the case's)")
    parser.add_argument("--jobs", type=positive_int, help="threads (default: all cores)")
    parser.add_argument("--out", metavar="DIR", help="also write excursions.csv into DIR")
    parser.add_argument("--json", action="store_true", help="print JSON instead of the table")
    parser.set_defaults(func=execute)


_HEADER = ("fraction [-]", "change", "design", "IAE ratio P50 [-]", "IAE ratio P90 [-]",
           "P(worse than fb) [%]", "upper 95 % [%]")


def _table(rows, unit: str) -> list[list[str]]:
    body = []
    for row in rows:
        body.append([f"{row.fraction:g}", f"{row.change:+.4g} {unit}", row.design,
                     f"{row.iae_ratio_p50:.4g}", f"{row.iae_ratio_p90:.4g}",
                     f"{100.0 * row.harm:.2f}", f"{100.0 * row.harm_high:.2f}"])
    return body


def execute(args: argparse.Namespace) -> int:
    from robustff.case import load_case
    from robustff.study.excursion import excursion_study, scaled_events

    case = load_case(args.case)
    scaled_events(case, args.input, args.fractions[0])  # argument problems before any run
    unit = case.balance.plant.signal_unit(args.input, case.time_unit)  # type: ignore[union-attr]
    rows = excursion_study(case, args.input, args.fractions, samples=args.samples,
                           seed=args.seed, jobs=args.jobs)
    body = _table(rows, unit)
    if args.out:
        folder = Path(args.out)
        folder.mkdir(parents=True, exist_ok=True)
        buffer = io.StringIO()
        writer = csv.writer(buffer, lineterminator="\n")
        writer.writerow(("fraction", f"change [{unit}]", "design", "iae_ratio_p50",
                         "iae_ratio_p90", "harm", "harm_high", "samples"))
        writer.writerows((r.fraction, r.change, r.design, r.iae_ratio_p50, r.iae_ratio_p90,
                          r.harm, r.harm_high, r.samples) for r in rows)
        from robustff.atomic import write_text_atomic

        write_text_atomic(folder / "excursions.csv", buffer.getvalue())
    if args.json:
        print(json.dumps(json_safe({"case": case.title, "input": args.input,
                                    "input_unit": unit,
                                    "rows": [row.__dict__ for row in rows],
                                    "caution": CAUTION}), indent=2))
        return EXIT_OK
    widths = [max(len(line[i]) for line in [list(_HEADER), *body]) for i in range(len(_HEADER))]
    print(f"{case.title}: excursions of {args.input} ({rows[0].samples} plants each; IAE "
          "ratio = IAE with / without feedforward per plant)")
    for line in [list(_HEADER), *body]:
        print("  ".join(cell.ljust(width) for cell, width in zip(line, widths, strict=True))
              .rstrip())
    if args.out:
        print(f"Written to {Path(args.out) / 'excursions.csv'}")
    print(CAUTION)
    return EXIT_OK
