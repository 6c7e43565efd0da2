"""The sections of ``report.html`` as HTML fragments, each from the summary (and the result).

Every value shown carries its unit (in the column header, or a ``unit`` column where it changes
from row to row); every percentile its 95 % interval. Text is escaped; nothing links outside.
"""

from __future__ import annotations

import html
from collections.abc import Sequence

from robustff import CAUTION
from robustff.case.text import printable_title
from robustff.design.installed_loop import installed_loop_lines
from robustff.design.margins_result import GAIN_MARGIN_LIMIT, MS_LIMIT, PHASE_MARGIN_LIMIT
from robustff.output.design_table import design_table_header, design_table_rows
from robustff.output.report_tables import (
    MARGIN_LABELS,
    design_paired_table,
    estimate,
    harm_table,
    margins_table,
)
from robustff.output.result_files import risk_sentence
from robustff.study import StudyResult
from robustff.study.disturbance_drivers import driver_sentence
from robustff.study.summary import PAIRED_METRICS, VERDICT_REASONS
from robustff.study.summary_types import Summary
from robustff.units import per_unit

__all__ = [
    "first_page",
    "designs_section",
    "statistics_section",
    "margins_section",
    "case_section",
    "reproducibility_section",
    "html_table",
    "fmt",
]

ARM_WORDS = "fb = feedback only; fbff = feedback + feedforward (the case's own design)."


def esc(value: object) -> str:
    return html.escape(str(value))


def fmt(value: object, digits: str = ".4g", scale: float = 1.0) -> str:
    """A number to ``digits``; ``n/a`` for None."""
    if value is None:
        return "n/a"
    if isinstance(value, bool | str):
        return str(value)
    return f"{scale * float(value):{digits}}"  # type: ignore[arg-type]


def _number(value: object) -> float | None:
    """A table cell known to hold a number or None, as ``float | None``."""
    return None if value is None else float(value)  # type: ignore[arg-type]


def _percent(value: float | None, digits: str = ".1f") -> str:
    return "n/a" if value is None else f"{100.0 * value:{digits}}"


def html_table(header: Sequence[str], rows: Sequence[Sequence[object]], css: str = "",
               raw: bool = False, widths: Sequence[float] | None = None) -> str:
    """A table; cells escaped unless ``raw`` (cells already HTML); ``widths`` in % per column."""
    def cell(value: object) -> str:
        return str(value) if raw else esc(value)

    head = "".join(f"<th>{esc(h)}</th>" for h in header)
    body = "".join("<tr>" + "".join(f"<td>{cell(c)}</td>" for c in row) + "</tr>" for row in rows)
    klass = f' class="{css}"' if css else ""
    columns = "" if widths is None else (
        "<colgroup>" + "".join(f'<col style="width:{w:g}%">' for w in widths) + "</colgroup>")
    return (f"<table{klass}>{columns}<thead><tr>{head}</tr></thead><tbody>{body}</tbody>"
            "</table>")


def _with_interval(value: float | None, low: float | None, high: float | None,
                   digits: str = ".4g", scale: float = 1.0) -> str:
    text = esc(fmt(value, digits, scale))
    if value is None:
        return text
    return (f"{text}<br><span class=\"ci\">[{esc(fmt(low, digits, scale))}, "
            f"{esc(fmt(high, digits, scale))}]</span>")


def _estimate_cells(stats, percentiles: Sequence[float], digits: str = ".4g",
                    scale: float = 1.0) -> list[str]:
    return [_with_interval(*estimate(stats, p), digits=digits, scale=scale) for p in percentiles]


# --- first page -----------------------------------------------------------------------------


def first_page(summary: Summary) -> str:
    """The answer: recommendation, why in numbers, drivers, conditions, criteria, caution."""
    rec = summary["recommendation"]
    case_file = summary["reproducibility"]["case_file"]
    criteria = rec["criteria"]
    if rec["design"] is None:
        verdict = "No feedforward design is recommended"
    else:
        chosen = next(v for v in rec["designs"] if v["name"] == rec["design"])
        verdict = (f"Recommended: design {rec['design']} ({chosen['structure']}, gain factor "
                   f"{chosen['gain_factor']:g})")
    rows = []
    for v in rec["designs"]:
        low, high = v["harm_ci95"]
        imp_low, imp_high = v["improvement_p50_ci95"]
        rows.append([
            esc(v["name"]) + (" <b>(recommended)</b>" if v["name"] == rec["design"] else ""),
            esc(v["structure"]), esc(f"{v['gain_factor']:g}"),
            f"{_percent(v['improvement_p50'])}<br><span class=\"ci\">[{_percent(imp_low)}, "
            f"{_percent(imp_high)}]</span>",
            esc(_percent(v["improvement_p90"])),
            f"{_percent(v['harm_probability'], '.2f')} ({v['harm_count']} of {v['harm_n']})"
            f"<br><span class=\"ci\">[{_percent(low, '.2f')}, {_percent(high, '.2f')}]</span>",
            esc(v["unstable"]),
            # The criterion missed; the remedy (e.g. samples needed) is in the reason above.
            "meets the criteria" if v["passes"] else
            esc("misses: " + "; ".join(r.split("; ")[0] for r in v["reasons"])),
        ])
    header = ["design", "structure", "gain factor [-]",
              "median IAE improvement [%] (95 % interval)",
              "IAE improvement reached by 90 % of plants [%]",
              "P(IAE worse than feedback alone) [%] (95 % Wilson interval)",
              "unstable [count]", "verdict"]
    drivers = "".join(
        f"<li>{esc(d['name'])}: Spearman rho {fmt(d['rho'], '.2f')} [-] "
        f"(95 % interval {fmt(d['ci95'][0], '.2f')} to {fmt(d['ci95'][1], '.2f')}) with the "
        f"IAE ratio; " + (f"{fmt(d['rho_harm'], '.2f')} [-] with feedforward being worse"
                          if d["rho_harm"] is not None else
                          "no correlation with harm (no plant made worse)") + "</li>"
        for d in rec["drivers"]
    ) or "<li>no uncertain parameters, or too few samples to rank them</li>"
    by_disturbance = driver_sentence(summary["sensitivity_by_disturbance"])
    if by_disturbance:
        drivers += f"<li>{esc(by_disturbance)}</li>"
    # Warnings added to the summary after it was judged (e.g. the input-filter trial) too.
    later = [f"warning: {w}" for w in summary["warnings"]
             if f"warning: {w}" not in rec["conditions"]]
    conditions = "".join(f"<li>{esc(c)}</li>" for c in [*rec["conditions"], *later])
    file_line = ("case built in Python (no file)" if case_file is None else
                 f"case file {esc(case_file['name'])}, SHA-256 "
                 f"<code>{esc(case_file['sha256'])}</code>")
    return (
        '<section class="first">'
        f"<h1>{esc(printable_title(summary['title']))}</h1>"
        f"<p class=\"sub\">Feedforward assessment by Monte Carlo simulation of "
        f"{summary['samples']} perturbed plant models"
        + (" (PARTIAL: the run was interrupted)" if summary["partial"] else "")
        + f"; {file_line}; {esc(summary['reproducibility']['created'])}.</p>"
        f'<div class="verdict"><h2>Recommendation</h2><p class="answer">{esc(verdict)}</p>'
        f"<p>{esc(rec['reason'])}.</p></div>"
        f'<p class="caution">{esc(CAUTION)}</p>'
        f"<p><b>Criteria</b> ({esc(criteria['basis'])}): upper end of the 95 % interval of "
        f"P(IAE worse) at most {_percent(criteria['max_harm'])} %, median IAE improvement at "
        f"least {_percent(criteria['min_improvement'])} %, and no more unstable samples than "
        "feedback alone. Set them in the case file's [recommendation] table.</p>"
        "<h3>Why, in numbers (every design on the same plants)</h3>"
        + html_table(header, rows, "compact", raw=True,
                     widths=(13, 10, 6, 11, 10, 14, 9, 27))
        + "<p class=\"note\">Median IAE improvement = 1 - P50 of IAE(fbff)/IAE(fb) per plant; "
        "the 90 % column is 1 - P90 of that ratio (90 % of the plants improve at least that "
        "much; negative: worse). P(worse) counts a plant unstable only with feedforward as "
        "worse.</p>"
        f"<h3>What drives the result</h3><ul>{drivers}</ul>"
        f"<h3>Conditions under which this holds</h3><ul>{conditions}</ul>"
        "</section>"
    )


# --- designs side by side ---------------------------------------------------------------------


def designs_section(summary: Summary, percentiles: Sequence[float], figure: str) -> str:
    """The designs table, the IAE-ratio plot per design and the paired differences."""
    paired = design_paired_table(summary, percentiles)
    unit = summary["units"]["iae"]
    rows = []
    for design, row in zip(summary["designs"][1:], paired.rows, strict=True):
        versus = design["versus_case"]
        low, high = versus["worse_than_case"]["ci95"]
        rows.append([esc(row[0]), *_estimate_cells(versus["iae_improvement"], percentiles),
                     _with_interval(versus["worse_than_case"]["probability"], low, high,
                                    ".1f", 100.0)])
    header = ["design", *[f"IAE gain vs case P{p:g} [{unit}]" for p in percentiles],
              "P(worse than case) [%]"]
    table = html_table(header, rows, "compact", raw=True) if rows else (
        "<p>Only the case's own design was simulated (add [[design]] tables or "
        "--designs standard to compare).</p>")
    return (
        "<section><h2>Designs side by side</h2>"
        f"<p>Every design was simulated on the same {summary['samples']} plants with the same "
        "noise (paired, common random numbers), so differences between rows are not Monte "
        "Carlo noise.</p>"
        + html_table(design_table_header(summary), design_table_rows(summary), "compact")
        + figure
        + "<h3>Paired differences against the case's design (95 % intervals in brackets)</h3>"
        + "<p class=\"note\">IAE gain vs case = IAE(case) - IAE(design) per plant: positive "
        "when the design does better.</p>"
        + table + "</section>"
    )


# --- statistics -------------------------------------------------------------------------------


def _enough(check) -> str:
    return "enough samples" if check["enough"] else "NOT enough samples"


def statistics_section(summary: Summary, percentiles: Sequence[float]) -> str:
    """Percentiles with intervals, harm, convergence, unstable and non-settling samples."""
    rows = []
    for name, arms in summary["metrics"].items():
        for arm in ("fb", "fbff"):
            stats = arms[arm]  # type: ignore[literal-required]
            rows.append([esc(name), arm, esc(summary["units"][name]), str(stats["n"]),
                         *_estimate_cells(stats, percentiles)])
    header = ["metric", "arm", "unit", "samples used [count]",
              *[f"P{p:g} [unit]" for p in percentiles]]
    paired_rows = []
    for kind, section in (("ratio fbff/fb", summary["ratio"]),
                          ("improvement fb - fbff", summary["improvement"])):
        for name in PAIRED_METRICS:
            unit = "-" if kind.startswith("ratio") else summary["units"][name]
            paired_rows.append([esc(kind), esc(name), esc(unit),
                                *_estimate_cells(section[name], percentiles)])
    harm = harm_table(summary)
    harm_rows = [[esc(r[0]), _with_interval(_number(r[1]), _number(r[2]), _number(r[3]),
                                            ".2f"), str(r[4]), str(r[5]), esc(r[6])]
                 for r in harm.rows]
    convergence = summary["convergence"]
    iae_check = convergence["iae_fbff"]
    not_settled = summary["not_settled"]
    time_unit = summary["time_unit"]
    return (
        "<section><h2>Statistics</h2>"
        f"<p>{summary['samples']} of {summary['requested']} samples simulated"
        + (" (PARTIAL: the run was interrupted)" if summary["partial"] else "")
        + f"; seed {summary['seed']}; sampling plan {esc(summary['sampling'])}. {ARM_WORDS} "
        "Each percentile is followed by its distribution-free 95 % interval (order "
        "statistics) in brackets; unstable samples are excluded from the percentiles.</p>"
        "<h3>Monte Carlo convergence</h3><ul>"
        f"<li>P(IAE worse): {_enough(convergence['ff_worse_iae'])} - "
        f"{esc(convergence['ff_worse_iae']['message'])}</li>"
        + (f"<li>IAE percentiles with feedforward: {_enough(iae_check)} - "
           f"{esc(iae_check['message'])}</li>" if iae_check else
           "<li>IAE percentiles with feedforward: fewer than two finite values</li>")
        + "</ul><h3>Unstable and non-settling samples</h3><ul>"
        f"<li>Unstable: {summary['unstable']['fb']} feedback only, {summary['unstable']['fbff']} "
        "with feedforward [count]. An unstable loop has no finite metric: it is left out of "
        "the percentiles, counted as 'feedforward worse' when unstable only with feedforward, "
        "and left out of P(worse) when unstable in both arms.</li>"
        f"<li>Not settled at the end of the window: {not_settled['fb']} feedback only, "
        f"{not_settled['fbff']} with feedforward [count]. Their settling time is the whole "
        f"{not_settled['window_after_last_event']:g} {esc(time_unit)} after the last event (a "
        "lower bound of the true time); a longer [simulation] duration measures it.</li>"
        + "".join(f"<li>warning: {esc(w)}</li>" for w in summary["warnings"])
        + "</ul><h3>Probability that feedforward makes things worse</h3>"
        + f"<ul><li>{esc(risk_sentence(summary, 'iae'))}</li>"
        f"<li>{esc(risk_sentence(summary, 'peak_deviation'))}</li></ul>"
        + html_table(["metric", "P(feedforward worse) [%] (95 % interval)", "worse [count]",
                      "compared [count]", "interval method"], harm_rows, "compact", raw=True)
        + "<h3>Percentiles of every metric</h3>"
        + html_table(header, rows, "stats", raw=True)
        + "<h3>Paired per-plant comparisons</h3>"
        + html_table(["comparison", "metric", "unit", *[f"P{p:g} [unit]" for p in percentiles]],
                     paired_rows, "stats", raw=True)
        + "</section>"
    )


# --- margins ----------------------------------------------------------------------------------


def margins_section(summary: Summary, percentiles: Sequence[float]) -> str:
    """Nominal margins and their spread at the requested percentiles."""
    table = margins_table(summary, percentiles)
    margins = summary.get("margins")
    if table is None or not margins:
        return ("<section><h2>Feedback stability margins</h2><p>Margins were not computed "
                "for this run.</p></section>")
    units, nominal, continuous = margins["units"], margins["nominal"], margins["nominal_continuous"]

    def value(number: object) -> str:  # None: infinite, or between a finite and an infinite one
        return "inf" if number is None else esc(fmt(number))

    def cell(stats, p: float) -> str:
        number, low, high = estimate(stats, p)
        return (f"{value(number)}<br><span class=\"ci\">[{value(low)}, {value(high)}]</span>"
                if low is not None or high is not None else value(number))

    rows = [[esc(label), esc(units[key]), value(nominal[key]),
             "-" if continuous is None else value(continuous[key]),
             *[cell(margins[key], p) for p in percentiles],
             value(margins[key]["min"]), value(margins[key]["max"]), str(margins[key]["n"]),
             str(margins[key]["infinite"])]
            for key, label in MARGIN_LABELS]
    header = [*table.header[:4], *[f"P{p:g} [row unit]" for p in percentiles],
              *table.header[-4:]]
    limits = margins["fraction_below_limits"]
    limit_lines = "".join(
        f"<li>{esc(key.replace('_', ' '))}: {_percent(_number(value))} % of the margin "
        "samples</li>"
        for key, value in limits.items() if value is not None
    )
    differ = margins["verdicts_differ"]
    warnings = "".join(f"<li>WARNING: {esc(w)}</li>" for w in margins["nominal_warnings"])
    return (
        "<section><h2>Feedback stability margins</h2>"
        f"<p>The loop as simulated: the controller samples the CV every "
        f"{margins['sample_time']:g} {esc(summary['time_unit'])} (the scan period) and holds "
        f"its output in between; the exact dead time. Spread over the first "
        f"{margins['samples']} samples, each percentile with its 95 % interval in brackets. "
        "'inf': infinite (no crossover), or a percentile between a finite and an infinite "
        "margin.</p>"
        + html_table(header, rows, "stats", raw=True)
        + f"<ul>{limit_lines}<li>unstable feedback loops: {margins['unstable']} [count]</li>"
        + (f"<li>samples the simulation judged otherwise: {differ} [count] "
           f"({esc(VERDICT_REASONS)})</li>" if differ else "")
        + warnings + "</ul>"
        f"<p class=\"note\">Limits Ms &gt; {MS_LIMIT:g}, GM &lt; {GAIN_MARGIN_LIMIT:g}, "
        f"PM &lt; {PHASE_MARGIN_LIMIT:g} deg are common practice, no source.</p></section>"
    )


# --- the case as run ----------------------------------------------------------------------------


def _pairs(rows: Sequence[tuple[str, object, str]]) -> str:
    return html_table(["setting", "value", "unit"],
                      [[k, fmt(v) if not isinstance(v, str) else v, u] for k, v, u in rows],
                      "compact")


def case_section(result: StudyResult, summary: Summary) -> str:
    """Everything the study was run with: models, controller, designs, events, uncertainty."""
    repro = summary["reproducibility"]
    case = result.case
    time_unit = case.time_unit
    signals = case.signals
    cv_unit = signals.controlled.unit or "CV unit"
    out_unit = signals.output.unit or "output unit"
    models = html_table(["parameter", "nominal value", "unit"],
                        [[r["key"], fmt(r["value"]) if not isinstance(r["value"], str)
                          else r["value"], r["unit"] or "-"] for r in repro["models"]],
                        "compact")
    feedback = summary["design"]["feedback"]
    gain_unit = per_unit(out_unit, cv_unit)
    ideal = _pairs([
        ("form", feedback["form"], "-"), ("tuning rule", feedback["rule"], "-"),
        ("Kc (gain)", feedback["kc"], gain_unit), ("Ti (integral time)", feedback["ti"], time_unit),
        ("Td (derivative time)", feedback["td"], time_unit),
        ("derivative filter time", feedback["filter_time"], time_unit),
        ("anti-windup tracking time", feedback["tracking_time"], time_unit),
        ("output low", feedback["output_low"], out_unit),
        ("output high", feedback["output_high"], out_unit),
        ("output bias", feedback["output_bias"], out_unit),
        ("closed-loop time constant", feedback["closed_loop_time"], time_unit),
    ])
    written = html_table(["key", "value"],
                         [[f"feedback.{k}", fmt(v) if not isinstance(v, str) else v]
                          for k, v in repro["controller_case_form"].items()], "compact")
    ff_unit = per_unit(out_unit, signals.disturbance.unit or "disturbance unit")
    designs = html_table(
        ["design", "structure", f"gain [{ff_unit}]", "gain factor [-]", f"lead [{time_unit}]",
         f"lag [{time_unit}]", f"delay [{time_unit}]", f"input filter [{time_unit}]"],
        [[d["name"], d["feedforward"]["structure"], fmt(d["feedforward"]["gain"]),
          fmt(d["feedforward"]["gain_factor"]), fmt(d["feedforward"]["lead"]),
          fmt(d["feedforward"]["lag"]), fmt(d["feedforward"]["delay"]),
          fmt(d["feedforward"]["input_filter"])] for d in summary["designs"]], "compact")
    events = html_table(["event", "kind", f"at [{time_unit}]", "size [signal unit]"],
                        [[e["words"], e["kind"], fmt(e["at"]), fmt(e["size"])]
                         for e in repro["events"]], "compact")
    window = repro["window"]
    sampling = repro["sampling"]
    run_rows = _pairs([
        ("window (duration)", window["duration"], time_unit),
        ("scan period (controller step)", window["scan_period"], time_unit),
        ("internal steps per scan (substeps)", window["substeps"], "-"),
        ("internal step", window["internal_step"], time_unit),
        ("sampling plan", sampling["plan"], "-"), ("seed", str(sampling["seed"]), "-"),
        ("samples requested", str(sampling["requested"]), "count"),
        ("samples simulated", str(sampling["samples"]), "count"),
        ("settling band", summary["settling_band"], cv_unit),
    ])
    uncertainty = html_table(
        ["parameter", "unit", "nominal", "distribution (in words)", "range low", "range high"],
        [[u["key"], u["unit"] or "-", fmt(u["nominal"]), u["words"], fmt(u["low"]),
          fmt(u["high"])] for u in repro["uncertainty"]], "compact"
    ) if repro["uncertainty"] else (
        "<p>No uncertain parameters: every sample is the nominal plant.</p>")
    correlations = html_table(
        ["first", "second", "rank correlation (Spearman) [-]"],
        [[c["first"], c["second"], fmt(c["rank_correlation"])] for c in repro["correlations"]],
        "compact") if repro["correlations"] else (
        "<p>No correlations: parameters drawn independently.</p>")
    notes = "\n".join(result.design.summary_lines(case))
    installed = "\n".join(installed_loop_lines(case, result.design)[2:])
    installed_html = (f"<pre class=\"notes\">{esc(installed)}</pre>" if installed
                      else "<p>No valve and no secondary loop: the controller output drives the "
                      "process model directly (an ideal actuator).</p>")
    return (
        "<section><h2>The case as run</h2>"
        "<h3>Nominal models</h3>" + models
        + "<h3>Controller</h3><p>As written in the case ([feedback]):</p>" + written
        + "<p>As designed, ideal (ISA) form used by the simulator, derivative on the "
        "measurement:</p>" + ideal
        + f"<pre class=\"notes\">{esc(notes)}</pre>"
        + "<h3>Valve and secondary loop</h3>" + installed_html
        + "<h3>Feedforward designs</h3>" + designs
        + "<h3>Events</h3>" + events
        + "<h3>Window, scan period and sampling</h3>" + run_rows
        + "<h3>Uncertainty</h3>" + uncertainty
        + "<p class=\"note\">Range: the support of bounded distributions, else P0.5 to P99.5 "
        "(after any clip).</p>"
        + "<h3>Correlations</h3>" + correlations
        + "</section>"
    )


def reproducibility_section(summary: Summary) -> str:
    """Case file, hash, command line, versions, date, host, and the case file text as run."""
    repro = summary["reproducibility"]
    case_file = repro["case_file"]
    command = ("run from Python (no command line)" if repro["command_line"] is None
               else " ".join(repro["command_line"]))
    rows: list[Sequence[object]] = [
        ["case file", "-" if case_file is None else case_file["name"]],
        ["case file path", "-" if case_file is None else case_file["path"]],
        ["case file SHA-256", "-" if case_file is None else str(case_file["sha256"])],
        ["case file size [bytes]", "-" if case_file is None else fmt(case_file["bytes"], ".0f")],
        ["command line", command],
        ["date and time", repro["created"]],
        ["time zone", repro["timezone"]],
        ["host", repro["host"]],
        ["platform", repro["platform"]],
        ["run time [s]", fmt(summary["elapsed_seconds"], ".3g")],
        *[[f"{name} version", version] for name, version in summary["versions"].items()],
        *[[f"{name} version", version] for name, version in repro["libraries"].items()],
    ]
    return (
        "<section><h2>Reproducibility</h2>"
        + html_table(["item", "value"], rows, "compact")
        + "<h3>The case as run (case-file text)</h3>"
        "<p class=\"note\">With the samples and seed of this run and any designs added on the "
        "command line; running it reproduces the numbers of this report.</p>"
        + f"<pre class=\"case\">{esc(repro['case_as_run'])}</pre></section>"
    )
