"""[recommendation]: read with defaults, refused when out of range, written and read back; the
case file's SHA-256 is that of the bytes read."""

from __future__ import annotations

import dataclasses
import hashlib

import pytest
from case_texts import MINIMAL

from robustff.case import RecommendationSpec, case_to_toml, load_case, parse_case
from robustff.errors import CaseError


def test_defaults_when_the_table_is_left_out():
    case = parse_case(MINIMAL)
    # Common practice, not a standard: 1 % harm (upper 95 % bound) and 20 % median improvement.
    assert case.recommendation == RecommendationSpec(0.01, 0.20)


def test_values_are_read():
    case = parse_case(MINIMAL + "\n[recommendation]\nmax_harm = 0.05\nmin_improvement = 0\n")
    assert case.recommendation == RecommendationSpec(0.05, 0.0)


@pytest.mark.parametrize(
    ("line", "key"),
    [
        ("max_harm = -0.01", "recommendation.max_harm"),
        ("max_harm = 5", "recommendation.max_harm"),  # 5 meant as percent: refused, not 500 %
        ("min_improvement = 20", "recommendation.min_improvement"),
        ('min_improvement = "20 %"', "recommendation.min_improvement"),
        ("max_harms = 0.01", "recommendation.max_harms"),
    ],
)
def test_bad_values_name_the_key(line, key):
    with pytest.raises(CaseError) as caught:
        parse_case(MINIMAL + f"\n[recommendation]\n{line}\n", source="c.toml")
    assert f"c.toml: {key}" in str(caught.value)


def test_saved_and_read_back_fresh_and_merged():
    case = parse_case(MINIMAL)
    changed = dataclasses.replace(case, recommendation=RecommendationSpec(0.02, 0.15))
    for text in (case_to_toml(changed), case_to_toml(changed, MINIMAL)):
        assert "[recommendation]" in text
        assert parse_case(text) == changed
    # A default left out of the original stays out.
    assert "[recommendation]" not in case_to_toml(case, MINIMAL)


def test_sha256_is_that_of_the_file_and_follows_one_byte(tmp_path):
    path = tmp_path / "loop.toml"
    path.write_bytes(MINIMAL.encode())
    first = load_case(path)
    assert first.source_sha256 == hashlib.sha256(path.read_bytes()).hexdigest()
    path.write_bytes(MINIMAL.replace("size = 1.0", "size = 2.0").encode())  # one byte changed
    second = load_case(path)
    assert second.source_sha256 == hashlib.sha256(path.read_bytes()).hexdigest()
    assert second.source_sha256 != first.source_sha256
    assert parse_case(MINIMAL).source_sha256 is None  # text without a file has no hash
