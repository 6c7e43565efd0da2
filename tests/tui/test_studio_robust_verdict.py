"""The studio's robust search dialog (F6) shows the verdict of 'robustff tune' with its reason.

Closed-form case of tests/helpers/harm_case.py: the P90-optimal gain factor (1.5, the search's
bound) makes IAE worse on the plants with Kd < 0.75 (6.25 % of them), the nominal design on
none, and the case accepts an upper 95 % harm bound of 3 %: the dialog must not recommend the
P90 optimum and must say why, in numbers.
"""

from __future__ import annotations

import asyncio
from pathlib import Path

import pytest
from harm_case import harm_case_text

textual = pytest.importorskip("textual")

from studio_pilot import studio, wait_until  # noqa: E402

from robustff.tui.robust_screens import RobustResultScreen  # noqa: E402


def test_robust_dialog_refuses_the_harmful_optimum_and_says_why(tmp_path: Path) -> None:
    path = tmp_path / "blend.toml"
    path.write_text(harm_case_text(max_harm=0.03, samples=200), encoding="utf-8")

    async def scenario() -> None:
        app = studio(path, tmp_path / "cache", samples=200, live=False)
        app.robust_budget = 12  # the optimum lies on the bound: a few evaluations reach it
        async with app.run_test(size=(100, 40)) as pilot:
            await pilot.press("f6")
            await pilot.pause()
            await pilot.press("p")
            await wait_until(pilot, lambda: isinstance(app.screen, RobustResultScreen),
                             "robust result dialog")
            await pilot.pause()
            result = app.screen.result
            g = result.robust.gain_factor
            assert g > 1.3  # harms the plants with Kd < g Kd0 / 2 > 0.65
            robust = result.verdict.designs["robust"]
            assert robust["harm_count"] > 0 and robust["harm_ci95"][1] > 0.03
            assert result.figures["robust"]["fresh"].iae_p90 < \
                result.figures["nominal"]["fresh"].iae_p90  # the objective alone favours it
            verdict = " ".join(str(app.screen.query_one("#robust-verdict").render()).split())
            assert verdict.startswith("Verdict: Recommended: keep the nominal design")
            assert "upper 95 % bound of P(harm) at most 3.0 %" in verdict  # the case's criteria
            bound = f"{100 * robust['harm_ci95'][1]:.1f} %"
            assert f"Robust optimum: harm bound {bound} > 3.0 %" in verdict
            assert "bootstrap interval" in verdict and "CV*s" in verdict
            text = app.screen_text()
            for label in ("P(harm) 95 % bound, fresh", "median IAE improvement, fresh",
                          "meets the criteria", "[a] apply anyway (not recommended)"):
                assert label in text, label
            row = next(line for line in text.splitlines() if "P(harm) 95 % bound" in line)
            assert bound in row and "no" in next(
                line for line in text.splitlines() if "meets the criteria" in line)
            await pilot.resize_terminal(80, 24)  # the verdict's reason above the fold
            await pilot.pause(0.3)
            small = app.screen_text()
            assert "Recommended: keep the nominal design" in small and "[a] apply" in small
            await pilot.press("k")  # keep current: the case keeps the nominal gain factor
            await pilot.pause()
            assert not isinstance(app.screen, RobustResultScreen)
            assert app.case.feedforward.gain_factor == 1.0

    asyncio.run(scenario())
