"""``robustff run``: the batch Monte Carlo study of one case."""

from __future__ import annotations

import argparse
import sys
import threading
import time
from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING

from robustff import CAUTION
from robustff.cli.arguments import positive_int, sample_count, seed_value
from robustff.cli.exit_codes import EXIT_INTERRUPTED, EXIT_OK
from robustff.cli.interrupts import InterruptGuard
from robustff.errors import RobustffError

if TYPE_CHECKING:
    from robustff.output.samples_file import SamplesCsvStream
    from robustff.study.summary_types import MarginsSummary, Summary

__all__ = ["register", "parse_percentiles", "ProgressPrinter"]

#: What an interrupt before the first finished chunk leaves behind (an earlier --out is untouched).
NOTHING_KEPT = ("robustff: interrupted before any sample finished; nothing was kept "
                "(no result files written)")

#: Same as ``robustff.output.samples_file.SAMPLES_FORMATS`` (a test checks), spelled out here so
#: that parsing the command line does not import the engine.
SAMPLES_FORMATS = ("csv", "npy")
_TABLE_METRICS = ("iae", "peak_deviation", "overshoot", "settling_time", "valve_travel",
                  "cv_std", "outside_band")
#: Same as ``robustff.design.alternatives.DESIGN_SETS`` (a test checks), spelled out here so that
#: parsing the command line does not import the engine.
DESIGN_SETS = ("standard",)


def register(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "run",
        help="run the Monte Carlo study of a case and write the result files",
        description="Run the Monte Carlo study of CASE (feedback only vs feedback + feedforward).",
    )
    parser.add_argument("case", metavar="CASE.toml", help="case file")
    parser.add_argument(
        "--samples", type=sample_count, help="number of perturbed plants (default: the case's)"
    )
    parser.add_argument("--seed", type=seed_value, help="random seed (default: the case's)")
    parser.add_argument("--jobs", type=positive_int, help="parallel workers (default: all cores)")
    parser.add_argument("--out", metavar="DIR", help="result folder (default: results/<case name>)")
    parser.add_argument(
        "--percentiles",
        type=parse_percentiles,
        default=None,
        metavar="P,P,...",
        help="percentiles to report, e.g. 5,50,95 (default: 5,10,50,90,95,99)",
    )
    parser.add_argument(
        "--cluster",
        metavar="tcp://HOST:PORT",
        help="run the chunks on a Dask cluster (needs the 'cluster' extra)",
    )
    parser.add_argument(
        "--report",
        action="store_true",
        help="also write report.html (print-ready, self-contained), report.pdf (when a "
        "headless Chromium is installed), report.xlsx (the percentile tables; needs openpyxl) "
        "and PNG/SVG plots",
    )
    parser.add_argument(
        "--paper",
        choices=("A4", "Letter"),
        default="A4",
        help="paper size of report.html's print layout and of report.pdf (default: A4)",
    )
    parser.add_argument(
        "--samples-format",
        choices=SAMPLES_FORMATS,
        default="csv",
        help="per-sample table as samples.csv (default) or samples.npy (NumPy binary, one "
        "named field per column, faster to write and load for large runs)",
    )
    parser.add_argument(
        "--designs",
        choices=DESIGN_SETS,
        help="also simulate a set of feedforward designs on the same plants: 'standard' adds "
        "static, lead-lag and lead-lag-delay, each at gain factor 1 and 0.8",
    )
    parser.set_defaults(func=execute)


def parse_percentiles(text: str) -> tuple[float, ...]:
    """``"5,50,95"`` -> ``(5.0, 50.0, 95.0)``; each strictly between 0 and 100."""
    try:
        values = tuple(sorted({float(part) for part in text.split(",") if part.strip()}))
    except ValueError:
        raise argparse.ArgumentTypeError(
            f"expected numbers separated by commas, got {text!r}"
        ) from None
    if not values or any(not 0.0 < v < 100.0 for v in values):
        raise argparse.ArgumentTypeError(
            f"percentiles must lie strictly between 0 and 100, got {text!r}"
        )
    return values


#: Seconds without a finished chunk after which ``run`` says what it is doing.
WAITING_SECONDS = 3.0
#: What it says then (the first run on a machine compiles the simulator before any chunk).
WAITING_NOTICE = ("robustff: simulating; no chunk has finished yet (the first run on a machine "
                  "also compiles the simulator, which can take up to a minute)")


class WaitingNotice:
    """Writes :data:`WAITING_NOTICE` once on stderr if :meth:`stop` is not called within
    ``seconds`` of :meth:`start` (default :data:`WAITING_SECONDS`)."""

    def __init__(self, stream=None, seconds: float | None = None) -> None:
        self.stream = stream or sys.stderr
        self.seconds = WAITING_SECONDS if seconds is None else seconds
        self._lock = threading.Lock()
        self._stopped = False
        self._timer: threading.Timer | None = None

    def start(self) -> None:
        self._timer = threading.Timer(self.seconds, self._write)
        self._timer.daemon = True
        self._timer.start()

    def stop(self) -> None:
        """No notice any more (progress was reported, or the run ended)."""
        with self._lock:
            self._stopped = True
        if self._timer is not None:
            self._timer.cancel()

    def _write(self) -> None:
        with self._lock:
            if not self._stopped:
                self.stream.write(WAITING_NOTICE + "\n")
                self.stream.flush()


class ProgressPrinter:
    """Progress on stderr: a bar on a terminal, plain lines (every 10 %) otherwise."""

    def __init__(self, stream=None) -> None:
        self.stream = stream or sys.stderr
        self.tty = self.stream.isatty()
        self.started = time.perf_counter()
        self.last_tenth = -1

    def __call__(self, done: int, total: int) -> None:
        fraction = done / total if total else 1.0
        elapsed = time.perf_counter() - self.started
        if self.tty:
            filled = int(30 * fraction)
            self.stream.write(
                f"\r[{'#' * filled}{'.' * (30 - filled)}] {done}/{total} samples {elapsed:5.1f} s"
            )
            if done >= total:
                self.stream.write("\n")
        elif int(10 * fraction) > self.last_tenth:
            self.last_tenth = int(10 * fraction)
            self.stream.write(
                f"progress: {done}/{total} samples ({100 * fraction:.0f} %), {elapsed:.1f} s\n"
            )
        self.stream.flush()


def _print_table(summary: Summary, percentiles: Sequence[float]) -> None:
    from robustff.output.result_files import percentile_rows

    rows = percentile_rows(summary, percentiles, _TABLE_METRICS)
    # outside_band needs [signals.controlled] band: without one its rows hold no number
    rows = [row for row in rows if row[0] != "outside_band"
            or any(cell != "n/a" for cell in row[3:])]
    header = ["metric", "arm", "unit", *[f"P{p:g}" for p in percentiles]]
    widths = [max(len(str(r[i])) for r in [header, *rows]) for i in range(len(header))]
    for row in [header, *rows]:
        print(
            "  ".join(
                str(cell).rjust(w) if i > 2 else str(cell).ljust(w)
                for i, (cell, w) in enumerate(zip(row, widths, strict=True))
            )
        )


def _check_cluster_address(address: str) -> None:
    """``tcp://HOST:PORT`` with dask.distributed installed, or a RobustffError."""
    import re

    match = re.fullmatch(r"(tcp|tls)://[^\s:/]+:(\d{1,5})", address)
    if not match:
        raise RobustffError(f"--cluster: expected tcp://HOST:PORT, got {address!r}")
    if not 1 <= int(match.group(2)) <= 65535:
        raise RobustffError(
            f"--cluster: port {match.group(2)} is outside 1-65535 in {address!r}"
        )
    try:
        import distributed  # noqa: F401
    except ImportError:
        raise RobustffError(
            "--cluster needs dask.distributed: pip install 'robustff[cluster]'"
        ) from None


def _print_drivers(summary: Summary, rows: int = 5) -> None:
    """The ranked rank correlations of the uncertain parameters with the IAE ratio (and, with
    several disturbances, which disturbance's uncertainty drives it)."""
    ranking = [row for row in summary.get("sensitivity", []) if row.get("rho") is not None]
    if not ranking:
        return
    print("What drives the IAE ratio fbff/fb (Spearman rank correlation, 95 % interval):")
    width = max([28, *(len(row["name"]) for row in ranking[:rows])])
    for row in ranking[:rows]:
        low, high = row["ci95"]
        interval = "" if low is None or high is None else f"  [{low:+.2f}, {high:+.2f}]"
        print(f"  {row['name']:<{width}} {row['rho']:+.2f}{interval}")
    from robustff.study.disturbance_drivers import driver_sentence

    sentence = driver_sentence(summary["sensitivity_by_disturbance"])
    if sentence:
        print(sentence)


def _print_margins(margins: MarginsSummary) -> None:
    """The nominal loop's margins as simulated (and with a continuous controller), the share of
    samples with Ms > 2, the unstable count, where the simulation judged otherwise, warnings."""
    nominal = margins["nominal"]
    ms_above = margins["fraction_below_limits"]["ms_above_2"]
    # None only without any margin sample, which a run with at least one sample cannot give.
    share = "n/a" if ms_above is None else f"{100 * ms_above:.1f}"
    continuous = margins["nominal_continuous"]
    reference = ("" if continuous is None else
                 f" (continuous controller: GM {continuous['gain_margin']:.3g}, "
                 f"PM {continuous['phase_margin']:.3g} deg)")
    print(
        f"Feedback margins (nominal, as simulated at the {margins['sample_time']:g} "
        f"{margins['units']['delay_margin']} scan period): "
        f"GM {nominal['gain_margin']:.3g} (ratio), "
        f"PM {nominal['phase_margin']:.3g} deg, "
        f"Ms {nominal['ms']:.3g} (ratio){reference}; across {margins['samples']} samples: "
        f"{share} % with Ms > 2, "
        f"{margins['unstable']} unstable"
    )
    if margins["verdicts_differ"]:
        from robustff.study.summary import VERDICT_REASONS

        print(f"Note: the simulation judged {margins['verdicts_differ']} of these samples "
              f"differently ({VERDICT_REASONS}); summary.json lists them under "
              "margins.verdicts_differ_samples")
    for warning in margins["nominal_warnings"]:
        print(f"WARNING: {warning}")


def _check_memory(case, samples: int) -> None:
    """Refuse, before any work, a study the machine's free memory cannot hold."""
    from robustff.study.memory import available_memory_bytes, estimated_study_bytes

    need, free = estimated_study_bytes(case, samples), available_memory_bytes()
    if free is not None and need > 0.8 * free:
        raise RobustffError(
            f"--samples {samples:,}: the study would need about {need / 1e9:.1f} GB of memory "
            f"and {free / 1e9:.1f} GB is available; use fewer samples (each sample keeps its "
            "parameters and metrics) or a machine with more memory"
        )


def execute(args: argparse.Namespace) -> int:
    from robustff.case import load_case
    from robustff.cli.check_command import refuse_errors, warning_lines
    from robustff.output.result_files import check_output_folder
    from robustff.output.samples_file import SamplesCsvStream
    from robustff.stats import DEFAULT_PERCENTILES
    from robustff.study import run_study

    case = load_case(args.case)
    if args.designs:
        from robustff.design.alternatives import with_design_set

        case = with_design_set(case, args.designs)
    for line in warning_lines(refuse_errors(case)):  # the same review as ``robustff check``
        print(line, file=sys.stderr)
    percentiles = args.percentiles or DEFAULT_PERCENTILES
    out = Path(args.out) if args.out else Path("results") / case.name
    check_output_folder(out)
    _check_memory(case, args.samples or case.study.samples)
    if args.cluster:
        _check_cluster_address(args.cluster)
    cancel = threading.Event()
    # samples.csv is written as the chunks finish, while the next ones are simulated.
    stream = SamplesCsvStream(out) if args.samples_format == "csv" else None
    try:
        with InterruptGuard() as guard:
            printer = ProgressPrinter()
            waiting = WaitingNotice()

            def progress(done: int, total: int) -> None:
                waiting.stop()
                printer(done, total)
                if done >= total:
                    guard.keep()  # every sample simulated: an interrupt now would only lose them

            waiting.start()
            try:
                result = run_study(
                    case,
                    samples=args.samples,
                    seed=args.seed,
                    jobs=args.jobs,
                    cluster=args.cluster,
                    progress=progress,
                    cancel=cancel,
                    on_rows=stream.add if stream is not None else None,
                    spill_folder=out.parent,  # a large study's metrics: the results' disk
                )
            except KeyboardInterrupt:  # before the first chunk (design, nominal run, compiling)
                result = None
            finally:
                waiting.stop()
            guard.keep()
            if result is None or result.samples == 0:
                print(NOTHING_KEPT, file=sys.stderr)
                return EXIT_INTERRUPTED
            from robustff.cli.memory_reuse import return_large_blocks

            return_large_blocks()
            return _report(args, case, result, out, percentiles, stream)
    finally:
        if stream is not None:
            stream.discard()  # a table moved into the result folder is not touched


def _report(args: argparse.Namespace, case, result, out: Path, percentiles,
            stream: SamplesCsvStream | None = None) -> int:
    """Summarise a finished (or interrupted) study, write its files and print the outcome;
    ``stream`` holds ``samples.csv`` as written while the study ran."""
    from robustff.case.text import printable_title
    from robustff.output.result_files import risk_sentence, write_results
    from robustff.study.summary import summarize_study

    if result.partial:
        print(
            f"robustff: interrupted: {result.samples} of {result.requested} samples finished; "
            "writing partial results",
            file=sys.stderr,
        )
    summary = summarize_study(result, percentiles, getattr(args, "command_line", None))
    if summary["warnings"]:
        from robustff.study.noise_travel import filter_trial

        trial = filter_trial(result, jobs=args.jobs)  # the remedy's cost, on the same plants
        if trial is not None:
            summary["warnings"].append(trial.sentence(result))
    extra = None
    report_notes: list[str] = []
    if args.report:
        from robustff.output.html_report import margin_values, write_report_files

        def extra(folder: Path) -> None:
            files = write_report_files(result, summary, folder, percentiles,
                                       margin_values(result), paper=args.paper)
            report_notes.extend(files.notes)

    write_results(result, summary, out, percentiles, extra=extra,
                  samples_format=args.samples_format,
                  samples_file=stream.finish(result) if stream is not None else None)
    print(printable_title(case.title))
    print(
        f"{result.samples} samples"
        + (" (PARTIAL)" if result.partial else "")
        + f", seed {result.seed}, {result.elapsed:.2f} s"
    )
    for line in result.design.feedback_lines(case):  # the tuning as typed into the controller
        print(line)
    _print_table(summary, percentiles)
    print(f"settling_time: after each step, ramp or setpoint event, until |e| stays within "
          f"+-{summary['settling_band']:.3g} {summary['units']['peak_deviation']}; the longest "
          "over the events")
    if len(summary["designs"]) > 1:
        from robustff.output.design_table import design_table_text

        print(design_table_text(summary))
    print(risk_sentence(summary, "iae"))
    print(risk_sentence(summary, "peak_deviation"))
    entries = summary["frequency_by_disturbance"]
    if len(entries) > 1:
        for entry in entries:
            print(f"Where it helps, {entry['disturbance']}: {entry['words']} (frequency.csv)")
    else:
        print(f"Where it helps: {summary['frequency']['words']} (frequency.csv)")
    from robustff.output.record_headline import record_headline

    headline = record_headline(summary, case)
    if headline:
        print(headline)
    print(
        f"Unstable loops: fb {summary['unstable']['fb']}, fbff {summary['unstable']['fbff']} "
        "(feedback only, with feedforward; left out of the percentiles)"
    )
    print(summary["convergence"]["ff_worse_iae"]["message"])
    for warning in summary["warnings"]:
        print(f"warning: {warning}")
    _print_drivers(summary)
    margins = summary.get("margins")
    if margins:
        _print_margins(margins)
    for note in report_notes:
        print(f"note: {note}")
    if args.report:
        recommendation = summary["recommendation"]
        print("Recommendation: " + (f"design {recommendation['design']}"
                                    if recommendation["design"] else "none")
              + " (report.html, first page)")
    print(f"Results written to {out}/")
    print(CAUTION)
    return EXIT_INTERRUPTED if result.partial else EXIT_OK
