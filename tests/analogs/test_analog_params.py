"""The [analog] options: defaults, documentation, validation from study.toml and in Python."""
import dataclasses

import pytest

from analog.analogs.params import PARAMS, AnalogParams
from analog.errors import AnalogError, InputError
from analog.params import Params


def test_every_option_has_a_default_and_a_doc():
    assert PARAMS is AnalogParams and issubclass(PARAMS, Params)
    for f in dataclasses.fields(PARAMS):
        assert f.default is not dataclasses.MISSING, f.name
        assert f.metadata.get("doc"), f.name
    p = PARAMS()
    assert p.age_draws == 20 and p.ci_method == "profile" and p.hksj == "auto" and p.n_bootstrap == 200


def test_from_section_reports_every_problem():
    with pytest.raises(InputError) as info:
        PARAMS.from_section({"ci_method": "exact", "n_relatives": 0, "age_drawz": 3}, name="analog")
    text = str(info.value)
    assert "3 problems" in text and "did you mean 'age_draws'" in text
    assert "one of ['profile', 'wald']" in text and "a number in [1, 100]" in text


def test_direct_construction_is_checked():
    with pytest.raises(AnalogError, match="The 'pooling_method' option of \\[analog\\] must be one of"):
        AnalogParams(pooling_method="ML")
    with pytest.raises(AnalogError, match="The 'taxonomy_weight' option .* must be in \\[0.0, 1.0\\]"):
        AnalogParams(taxonomy_weight=1.5)
    assert AnalogParams.from_section({"pooling_method": "DL", "hksj": "on"}, name="analog").pooling_method == "DL"
