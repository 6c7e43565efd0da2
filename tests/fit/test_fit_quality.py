"""Poor fits are reported (residuals against the noise, whiteness, zero-width intervals, an
integrating model on self-regulating data) and never turn into a degenerate distribution."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from robustff.case import parse_case
from robustff.case.sampling import distribution_bounds
from robustff.fit.least_squares import fit_record
from robustff.fit.quality import ljung_box
from robustff.fit.records import read_record, record_from_arrays
from robustff.fit.response import simulate_response
from robustff.fit.spread import combine_fits, propose_distribution
from robustff.fit.write_case import fitted_case_text
from robustff.plant.models import TransferModel

DATA = Path(__file__).resolve().parents[2] / "cases" / "data"
BUMP = DATA / "stock-heater-bump-1.csv"
TEMPLATE = DATA / "stock-heater-template.toml"
H = 0.5


def _fopdt_record(noise: float = 0.02, seed: int = 1):
    n = 240
    t = np.arange(n) * H
    u = np.full(n, 30.0)
    u[30:] += 5.0
    y = 60.0 + simulate_response(TransferModel("fopdt", 1.5, 8.0, 0, 2.5), u - 30.0, H)
    y = y + np.random.default_rng(seed).normal(0.0, noise, n)
    return record_from_arrays(t, u, y)


def test_ljung_box_against_the_formula_by_hand() -> None:
    # Source: Ljung and Box, "On a measure of lack of fit in time series models", Biometrika 65
    # (1978) 297-303, eq. 2.2 (from memory): Q = n (n + 2) sum_{k=1}^{h} r_k^2 / (n - k), with
    # r_k = sum_t a_t a_{t-k} / sum_t a_t^2 of the mean-removed series.
    from scipy.stats import chi2

    x = np.array([0.3, -1.2, 0.8, 0.1, -0.4, 1.7, -0.9, 0.2, 0.5, -1.1,
                  0.6, 0.0, -0.3, 1.2, -0.8, 0.4, -0.2, 0.9, -1.4, 0.7])
    a = x - x.mean()
    n, lags = a.size, 4  # n // 5 = 4 lags for 20 values
    r = [sum(a[t] * a[t - k] for t in range(k, n)) / sum(v * v for v in a) for k in (1, 2, 3, 4)]
    q = n * (n + 2) * sum(r[k - 1] ** 2 / (n - k) for k in (1, 2, 3, 4))
    r1, q_code, p = ljung_box(x)
    assert r1 == pytest.approx(r[0], rel=1e-12)
    assert q_code == pytest.approx(q, rel=1e-12)
    assert p == pytest.approx(float(chi2.sf(q, lags)), rel=1e-12)


def test_a_good_fit_gives_no_poor_fit_warning() -> None:
    result = fit_record(_fopdt_record(), ci_method="jacobian")
    assert result.poor_fit == ()


def test_integrating_model_on_self_regulating_data_is_flagged() -> None:
    # The case: the stock heater is self-regulating; an IPDT leaves residuals many times
    # the noise, strongly correlated, and its ramp does not level off as the output does.
    record = read_record(BUMP, "steam_valve_pct", "stock_temp_degC", time_column="time_min")
    good = fit_record(record, "fopdt", ci_method="jacobian")
    assert good.poor_fit == ()
    bad = fit_record(record, "ipdt", ci_method="jacobian")
    text = " ".join(bad.poor_fit)
    assert "poor fit" in text and "times the noise level" in text
    assert "far from white" in text and "Ljung-Box" in text
    assert "self-regulating" in text


def test_swapped_columns_give_zero_width_intervals_and_no_degenerate_distribution() -> None:
    record = read_record(BUMP, "stock_temp_degC", "steam_valve_pct", time_column="time_min")
    result = fit_record(record, "fopdt", resamples=40)
    assert any("zero width" in w for w in result.poor_fit)
    proposals = combine_fits([result])
    certain = [name for name, proposal in proposals.items() if not proposal.has_spread]
    assert certain  # time constant and dead time
    text, _ = fitted_case_text(TEMPLATE.read_text(encoding="utf-8"), "process", result.model,
                               proposals, None)
    case = parse_case(text)
    keys = [parameter.key for parameter in case.uncertainty]
    assert "process.gain" in keys and not any(f"process.{name}" in keys for name in certain)
    for parameter in case.uncertainty:
        low, high = distribution_bounds(parameter, case.nominal_value(parameter.key))
        assert high > low, parameter  # never a degenerate distribution


@pytest.mark.parametrize("values, cis", [
    ([5.0], [[np.nan, np.nan]]),            # no interval computed (--ci none)
    ([5.0], [[5.0, 5.0]]),                  # interval of zero width
    ([5.0, 5.0, 5.0], [[5.0, 5.0]] * 3),    # three files, all identical, no width
])
def test_no_spread_is_none_never_uniform_x_x(values, cis) -> None:
    proposal = propose_distribution(np.array(values), np.array(cis), nonnegative=True)
    assert proposal.kind == "none" and not proposal.has_spread and proposal.to_dict() == {}
    assert proposal.value == 5.0
