"""Stage options built from study.toml sections: every problem reported, clear messages."""
from dataclasses import dataclass, field

import pytest

from analog.errors import InputError, ProblemList
from analog.params import Params


@dataclass(frozen=True)
class DemoParams(Params):
    draws: int = field(default=10, metadata={"min": 1, "max": 1000})
    method: str = field(default="DL", metadata={"choices": ("DL", "REML")})
    width: float = 10.0
    top_k: tuple[int, ...] = (5, 10)


def test_defaults_when_section_absent():
    p = DemoParams.from_section(None, name="demo")
    assert p == DemoParams()
    assert p.to_dict() == {"draws": 10, "method": "DL", "width": 10.0, "top_k": [5, 10]}


def test_values_and_list_to_tuple():
    p = DemoParams.from_section({"draws": 5, "width": 2, "top_k": [1, 2, 3]}, name="demo")
    assert p.draws == 5 and p.width == 2 and p.top_k == (1, 2, 3)


def test_all_problems_reported_together():
    with pytest.raises(InputError) as info:
        DemoParams.from_section({"drawz": 5, "method": "ML", "width": "wide", "draws": 0}, name="demo")
    text = str(info.value)
    assert "4 problems" in text
    assert "unknown option 'drawz'" in text and "did you mean 'draws'" in text
    assert "one of ['DL', 'REML']" in text
    assert "'wide' (str)" in text
    assert "a number in [1, 1000]" in text


def test_collects_into_given_list():
    problems = ProblemList()
    DemoParams.from_section({"method": "x"}, name="demo", problems=problems)
    assert len(problems) == 1 and problems[0].column == "[demo] method"


def test_bool_is_not_an_int():
    with pytest.raises(InputError, match="whole number"):
        DemoParams.from_section({"draws": True}, name="demo")
