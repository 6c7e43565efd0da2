"""``[feedforward] input_filter``: read, validated naming the key, written and read back."""

from __future__ import annotations

import dataclasses

import pytest
from case_texts import MINIMAL

from robustff.case import case_to_toml, parse_case
from robustff.errors import CaseError

STATIC = MINIMAL + "\n[feedforward]\nstructure = 'static'\n"


def test_input_filter_is_read_and_written_back() -> None:
    case = parse_case(STATIC + "input_filter = 2.5\n")
    assert case.feedforward.input_filter == 2.5
    again = parse_case(case_to_toml(case))
    assert again.feedforward == case.feedforward


def test_no_input_filter_is_none_and_not_written() -> None:
    case = parse_case(STATIC)
    assert case.feedforward.input_filter is None
    assert "input_filter" not in case_to_toml(case)
    changed = dataclasses.replace(case, feedforward=dataclasses.replace(case.feedforward,
                                                                        input_filter=4.0))
    assert parse_case(case_to_toml(changed)).feedforward.input_filter == 4.0


@pytest.mark.parametrize("text", [
    STATIC + "input_filter = -1.0\n",
    STATIC + "input_filter = 'fast'\n",
    MINIMAL + "\n[feedforward]\nstructure = 'none'\ninput_filter = 2.0\n",
])
def test_bad_input_filter_names_the_key(text: str) -> None:
    with pytest.raises(CaseError, match=r"feedforward\.input_filter"):
        parse_case(text)
