"""The compiled ``%.10g`` CSV formatter gives exactly Python's own text.

The reference is Python's printf-style ``%.10g`` conversion (Python Software Foundation, *The
Python Standard Library*, "printf-style String Formatting", conversion type ``'g'``: exponential
notation if the exponent is below -4 or not below the precision, else decimal; trailing zeros
removed), through ``numpy.savetxt(fmt="%.10g")``, which ``samples.csv`` was written with before
the compiled formatter. Every value must match byte for byte: the exponent switch, the rounding
of ties (round half to even on the exact binary value), the carry into the next power of ten,
negative zero, NaN and infinities, subnormals and values outside the fast path's range.
"""

from __future__ import annotations

import io

import numpy as np
import pytest

from robustff.output.csv_numbers import format_csv_rows


def _python_text(block: np.ndarray) -> str:
    stream = io.StringIO()
    np.savetxt(stream, block, delimiter=",", fmt="%.10g")
    return stream.getvalue()


def _assert_same(block: np.ndarray) -> None:
    got, expected = format_csv_rows(block), _python_text(block)
    if got != expected:  # name the first differing row rather than dump megabytes
        for row, (a, b) in enumerate(zip(got.splitlines(), expected.splitlines(), strict=False)):
            assert a == b, f"row {row}: {a!r} != {b!r}"
    assert got == expected


def test_any_bit_pattern() -> None:
    # Uniform over the bit patterns: every exponent, subnormals, NaN payloads, both zeros' signs.
    rng = np.random.default_rng(20261203)
    bits = rng.integers(np.iinfo(np.int64).min, np.iinfo(np.int64).max, (4000, 25),
                        dtype=np.int64, endpoint=True)
    _assert_same(bits.view(np.float64))


def test_magnitudes_across_the_notation_switch() -> None:
    rng = np.random.default_rng(7)
    mantissas = rng.standard_normal((5000, 20))
    exponents = rng.integers(-16, 34, (5000, 20))
    _assert_same(mantissas * 10.0 ** exponents)


def test_short_decimals_integers_and_flags() -> None:
    # What the table holds most: sample indices, 0/1 flags, round case values.
    rng = np.random.default_rng(3)
    block = np.column_stack([
        np.arange(3000, dtype=np.float64),
        rng.integers(0, 2, 3000).astype(np.float64),
        np.array([round(v, d) for v, d in zip(rng.uniform(-500, 500, 3000).tolist(),
                                              rng.integers(0, 6, 3000).tolist(), strict=True)]),
        rng.integers(-10**12, 10**12, 3000).astype(np.float64),
    ])
    _assert_same(block)


def test_ties_and_near_ties() -> None:
    # Exact halves at the eleventh significant digit (the formatter must hand these to Python,
    # which rounds half to even on the exact value) and their neighbours one ulp away.
    rng = np.random.default_rng(11)
    halves = (rng.integers(10**9, 10**10, 3000) + 0.5) * 10.0 ** rng.integers(-14, 0, 3000)
    halves = np.concatenate([halves, [1234567890.5, 1234567891.5, 0.5, 2.5, 1.0000000005]])
    block = np.column_stack([halves, np.nextafter(halves, np.inf), np.nextafter(halves, -np.inf)])
    _assert_same(block)


@pytest.mark.parametrize("value", [
    0.0, -0.0, np.nan, -np.nan, np.inf, -np.inf, 5e-324, 2.2250738585072014e-308,
    1.7976931348623157e308, 1e-5, 1e-4, 9.9999999995e-5, 9.99999999949e-5, 0.0001000000000,
    999999999.95, 9999999999.4, 9999999999.5, 9999999999.6, 1e9, 1e10, 1e-13, 1e-14, 1e31,
    9.999999999e30, 9.9999999999e30, 123456789012.0, -1e-13, 1.0, -1.0, 0.1, 1 / 3, 2 / 3,
])
def test_edge_values(value: float) -> None:
    block = np.array([[value, -value, value * 10, value / 10]])
    _assert_same(block)


def test_empty_and_shape() -> None:
    assert format_csv_rows(np.empty((0, 5))) == ""
    assert format_csv_rows(np.array([[1.5, 2.0]])) == "1.5,2\n"
    with pytest.raises(ValueError):
        format_csv_rows(np.zeros(3))
