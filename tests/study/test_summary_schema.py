"""``summary.json`` against ``docs/summary.schema.json`` and the types of
:mod:`robustff.study.summary_types`: real runs validate, broken summaries do not.
"""

from __future__ import annotations

import copy
import json
from collections.abc import Iterable
from pathlib import Path
from typing import Any

import jsonschema
import pytest

from robustff.case import load_case
from robustff.cli import EXIT_INTERRUPTED, EXIT_OK, main, run_command
from robustff.engine.metrics import METRIC_NAMES
from robustff.output.result_files import json_safe
from robustff.study import run_study
from robustff.study import summary_types as types
from robustff.study.summary import HARM_METRICS, PAIRED_METRICS, summarize_study

ROOT = Path(__file__).resolve().parents[2]
SCHEMA = json.loads((ROOT / "docs" / "summary.schema.json").read_text())
CASES = sorted((ROOT / "cases").glob("*.toml"))
VALIDATOR = jsonschema.Draft202012Validator(SCHEMA)


def _messages(errors: Iterable[jsonschema.ValidationError]) -> list[str]:
    """Messages of the errors and of the alternatives inside them (``oneOf`` for null sections)."""
    out = []
    for error in errors:
        out.append(error.message)
        out += _messages(error.context or ())
    return out


def _errors(summary: object) -> list[str]:
    return _messages(VALIDATOR.iter_errors(summary))


def _run(case: Path, out: Path, *extra: str) -> dict[str, Any]:
    status = main(["run", str(case), "--samples", "200", "--jobs", "1", "--out", str(out), *extra])
    assert status == EXIT_OK
    return json.loads((out / "summary.json").read_text())


@pytest.fixture(scope="module")
def summaries(tmp_path_factory: pytest.TempPathFactory) -> dict[str, dict[str, Any]]:
    """summary.json of each demo case, 200 samples."""
    return {case.stem: _run(case, tmp_path_factory.mktemp(case.stem)) for case in CASES}


def test_the_schema_is_a_valid_draft_2020_12_schema() -> None:
    assert SCHEMA["$schema"] == "https://json-schema.org/draft/2020-12/schema"
    jsonschema.Draft202012Validator.check_schema(SCHEMA)


def test_there_are_seven_demo_cases() -> None:
    assert [case.stem for case in CASES] == [
        "brine-makeup-tank", "pasteuriser-tempering-tank", "rinse-water-heater",
        "steam-heater-sticky-valve", "surge-tank-level", "syrup-dilution", "wash-water-heater",
    ]


@pytest.mark.parametrize("name", [case.stem for case in CASES])
def test_each_demo_summary_validates(summaries: dict[str, dict[str, Any]], name: str) -> None:
    assert _errors(summaries[name]) == []


def test_other_percentiles_validate(tmp_path: Path) -> None:
    # --percentiles changes the p<P> keys; the schema matches them by pattern.
    summary = _run(CASES[0], tmp_path / "out", "--percentiles", "2.5,50,97.5")
    assert "p2.5_ci95" in summary["metrics"]["iae"]["fb"]
    assert "p2.5" in summary["margins"]["ms"]
    assert _errors(summary) == []


def test_an_interrupted_run_writes_a_summary_of_the_same_shape(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    class InterruptAfterFirstChunk(run_command.ProgressPrinter):
        def __call__(self, done: int, total: int) -> None:
            raise KeyboardInterrupt  # as Ctrl-C between chunks

    monkeypatch.setattr(run_command, "ProgressPrinter", InterruptAfterFirstChunk)
    out = tmp_path / "out"
    argv = ["run", str(CASES[1]), "--samples", "2500", "--jobs", "1", "--out", str(out)]
    assert main(argv) == EXIT_INTERRUPTED
    summary = json.loads((out / "summary.json").read_text())
    assert summary["partial"] is True and summary["samples"] < summary["requested"] == 2500
    assert _errors(summary) == []


def test_a_summary_without_margins_validates() -> None:
    # The studio's quick first pass skips the margins; its export writes margins: null.
    result = run_study(load_case(CASES[1]), samples=50, jobs=1, margins=False)
    summary = json_safe(summarize_study(result))
    assert isinstance(summary, dict) and summary["margins"] is None
    assert _errors(summary) == []


@pytest.mark.parametrize(
    "path",
    [
        ("ff_worse",),
        ("caution",),
        ("metrics", "iae", "fbff"),
        ("metrics", "settling_time"),
        ("metrics", "iae", "fb", "n_excluded"),
        ("margins", "nominal", "ms"),
        ("margins", "sample_time"),
        ("margins", "nominal_continuous"),
        ("margins", "verdicts_differ"),
        ("design", "feedback", "kc"),
        ("convergence", "iae_fbff"),
        ("reproducibility", "case_file", "sha256"),
        ("reproducibility", "command_line"),
        ("reproducibility", "created"),
        ("reproducibility", "uncertainty", 0, "words"),
        ("recommendation", "criteria", "max_harm"),
        ("recommendation", "designs", 0, "harm_ci95"),
        ("not_settled", "fbff"),
        ("frequency",),
        ("frequency", "crossover"),
        ("metrics", "cv_std"),
        ("units", "outside_band"),
    ],
)
def test_a_missing_required_key_fails(
    summaries: dict[str, dict[str, Any]], path: tuple[str, ...]
) -> None:
    broken = copy.deepcopy(summaries["syrup-dilution"])
    parent = broken
    for key in path[:-1]:
        parent = parent[key]
    del parent[path[-1]]
    messages = _errors(broken)
    assert any(f"'{path[-1]}' is a required property" in m for m in messages), messages


@pytest.mark.parametrize(
    ("path", "value"),
    [
        (("samples",), "200"),
        (("partial",), "no"),
        (("seed",), 1.5),
        (("metrics", "iae", "fb", "p50"), "12.3"),
        (("metrics", "iae", "fb", "p50_ci95"), [1.0]),
        (("ff_worse", "iae", "probability"), [0.1]),
        (("margins", "nominal", "stable"), 1),
        (("margins", "verdicts_differ"), -1),
        (("margins", "sample_time"), 0.0),
        (("sensitivity",), {}),
        (("units", "iae"), None),
        (("design", "feedforward", "structure"), "lead"),
        (("reproducibility", "case_file", "sha256"), "not-a-hash"),
        (("reproducibility", "sampling", "plan"), "grid"),
        (("recommendation", "criteria", "max_harm"), 1.5),
        (("recommendation", "design"), 3),
        (("not_settled", "fb"), -1),
        (("margins", "ms", "p50_ci95"), [1.0]),
        (("frequency", "crossover"), "0.1"),
        (("frequency", "record"), "none"),
        (("frequency", "helps_up_to_nyquist"), 0),
    ],
)
def test_a_wrong_type_fails(
    summaries: dict[str, dict[str, Any]], path: tuple[str, ...], value: object
) -> None:
    broken = copy.deepcopy(summaries["wash-water-heater"])
    parent = broken
    for key in path[:-1]:
        parent = parent[key]
    parent[path[-1]] = value
    assert _errors(broken) != []


@pytest.mark.parametrize(
    "path", [(), ("metrics", "iae", "fb"), ("margins", "nominal"), ("versions",)]
)
def test_an_unknown_key_fails(summaries: dict[str, dict[str, Any]], path: tuple[str, ...]) -> None:
    broken = copy.deepcopy(summaries["surge-tank-level"])
    parent = broken
    for key in path:
        parent = parent[key]
    parent["p50_ci"] = 1.0  # a misspelt percentile interval key
    messages = _errors(broken)
    unknown = ("'p50_ci' was unexpected", "'p50_ci' does not match any of the regexes")
    assert any(text in m for m in messages for text in unknown), messages


def test_the_schema_lists_the_metrics_the_study_reports() -> None:
    top = SCHEMA["properties"]
    for section in ("units", "metrics"):
        assert list(top[section]["properties"]) == list(METRIC_NAMES), section
    for section in ("improvement", "ratio"):
        assert list(top[section]["properties"]) == list(PAIRED_METRICS), section
    assert list(top["ff_worse"]["properties"]) == list(HARM_METRICS)


def _margins_schema() -> dict[str, Any]:
    return next(s for s in SCHEMA["properties"]["margins"]["oneOf"] if s["type"] == "object")


@pytest.mark.parametrize(
    ("typed", "schema"),
    [
        (types.Summary, lambda: SCHEMA),
        (types.MetricStats, lambda: SCHEMA["$defs"]["metricStats"]),
        (types.ArmStats, lambda: SCHEMA["$defs"]["armStats"]),
        (types.HarmEstimateDict, lambda: SCHEMA["$defs"]["harm"]),
        (types.ConvergenceDict, lambda: SCHEMA["$defs"]["convergenceCheck"]),
        (types.SensitivityRow, lambda: SCHEMA["$defs"]["sensitivityRow"]),
        (types.MarginDistribution, lambda: SCHEMA["$defs"]["marginDistribution"]),
        (types.MarginsSummary, _margins_schema),
        (types.NominalMargins, lambda: _margins_schema()["properties"]["nominal"]),
        (types.NominalMargins,
         lambda: _margins_schema()["properties"]["nominal_continuous"]["oneOf"][0]),
        (types.FractionBelowLimits,
         lambda: _margins_schema()["properties"]["fraction_below_limits"]),
        (types.MarginUnits, lambda: _margins_schema()["properties"]["units"]),
        (types.DesignDict, lambda: SCHEMA["properties"]["design"]),
        (types.FeedbackDesign, lambda: SCHEMA["properties"]["design"]["properties"]["feedback"]),
        (types.FeedforwardDesign,
         lambda: SCHEMA["properties"]["design"]["properties"]["feedforward"]),
        (types.Versions, lambda: SCHEMA["properties"]["versions"]),
        (types.NotSettled, lambda: SCHEMA["properties"]["not_settled"]),
        (types.RecommendationDict, lambda: SCHEMA["properties"]["recommendation"]),
        (types.Criteria,
         lambda: SCHEMA["properties"]["recommendation"]["properties"]["criteria"]),
        (types.DesignVerdict, lambda: SCHEMA["$defs"]["designVerdict"]),
        (types.Driver,
         lambda: SCHEMA["properties"]["recommendation"]["properties"]["drivers"]["items"]),
        (types.Reproducibility, lambda: SCHEMA["properties"]["reproducibility"]),
        (types.CaseFile, lambda: SCHEMA["properties"]["reproducibility"]["properties"]
         ["case_file"]["oneOf"][0]),
        (types.ModelParameterRow,
         lambda: SCHEMA["properties"]["reproducibility"]["properties"]["models"]["items"]),
        (types.EventRow,
         lambda: SCHEMA["properties"]["reproducibility"]["properties"]["events"]["items"]),
        (types.WindowDict,
         lambda: SCHEMA["properties"]["reproducibility"]["properties"]["window"]),
        (types.UncertaintyRow,
         lambda: SCHEMA["properties"]["reproducibility"]["properties"]["uncertainty"]["items"]),
        (types.CorrelationRow,
         lambda: SCHEMA["properties"]["reproducibility"]["properties"]["correlations"]["items"]),
        (types.SamplingDict,
         lambda: SCHEMA["properties"]["reproducibility"]["properties"]["sampling"]),
        (types.FrequencyDict, lambda: SCHEMA["$defs"]["frequency"]),
        (types.CompensatorDict, lambda: SCHEMA["$defs"]["compensator"]),
        (types.FrequencyRecordDict,
         lambda: SCHEMA["$defs"]["frequency"]["properties"]["record"]["oneOf"][1]),
    ],
)
def test_the_types_and_the_schema_name_the_same_keys(typed: type, schema: Any) -> None:
    section = schema()
    assert set(typed.__required_keys__) == set(section["required"])
    # optional keys (NotRequired) are in the schema's properties, not in its required list
    assert set(typed.__required_keys__) | set(typed.__optional_keys__) == set(section["properties"])
    assert section["additionalProperties"] is False
