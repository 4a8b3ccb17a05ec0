"""study.toml: checked against data_schemas/study.schema.json, traits and stage options built."""
from __future__ import annotations

import importlib

import pytest

from analog.errors import InputError
from analog.intake import load_study
from analog.params import SECTION_MODULES, Params


def test_unknown_section_with_suggestion(study):
    study.config["scenaro"] = {"warming_c": 2.0}
    with pytest.raises(InputError, match=r"study\.toml:-:\[scenaro\]: found an unknown section \[scenaro\]; "
                                         r"expected the sections .*; fix: rename it to 'scenario'"):
        load_study(study.write())


def test_unknown_option_in_fixed_section(study):
    study.config["study"]["sed"] = 3
    with pytest.raises(InputError, match=r"study\.toml:-:\[study\] sed: found an unknown option 'sed'.*"
                                         r"fix: rename it to 'seed'"):
        load_study(study.write())


def test_missing_required_option(study):
    del study.config["study"]["seed"]
    with pytest.raises(InputError, match=r"study\.toml:-:\[study\] seed: found no option 'seed'"):
        load_study(study.write())


def test_seed_of_wrong_type(study):
    study.config["study"]["seed"] = "forty"
    with pytest.raises(InputError, match=r"study\.toml:-:\[study\] seed: found 'forty' \(str\); "
                                         r"expected a value of type integer"):
        load_study(study.write())


def test_trait_kind_not_allowed(study):
    study.config["traits"]["length_mm"]["kind"] = "continuous"
    with pytest.raises(InputError, match=r"study\.toml:-:\[traits\.length_mm\] kind: found 'continuous'; "
                                         r"expected one of \['categorical', 'ordinal', 'numeric', 'binary'\]"):
        load_study(study.write())


def test_ordinal_trait_needs_levels(study):
    del study.config["traits"]["body_size"]["levels"]
    with pytest.raises(InputError, match=r"study\.toml:-:\[traits\.body_size\] levels: found no option 'levels'"):
        load_study(study.write())


def test_reference_only_for_categorical(study):
    study.config["traits"]["length_mm"]["reference"] = "short"
    with pytest.raises(InputError, match=r"study\.toml:-:\[traits\.length_mm\] reference: found option 'reference' "
                                         r"for a numeric trait"):
        load_study(study.write())


def test_reference_must_be_a_level(study):
    study.config["traits"]["depth_zone"]["reference"] = "reef"
    with pytest.raises(InputError, match=r"study\.toml:-:\[traits\.depth_zone\] reference: found reference 'reef'; "
                                         r"expected one of the levels \['shelf', 'slope', 'basin'\]"):
        load_study(study.write())


def test_trait_named_like_a_fixed_column(study):
    study.config["traits"]["genus"] = {"kind": "categorical"}
    with pytest.raises(InputError, match=r"study\.toml:-:\[traits\.genus\]: found a trait named 'genus'"):
        load_study(study.write())


def test_data_date_must_be_iso(study):
    study.config["study"]["data_date"] = "1 Nov 2026"
    with pytest.raises(InputError, match=r"study\.toml:-:\[study\] data_date: found '1 Nov 2026'; expected a date"):
        load_study(study.write())


def test_toml_date_value_accepted(study):
    folder = study.write()
    text = (folder / "study.toml").read_text().replace("seed = 7", "seed = 7\ndata_date = 2026-11-01")
    (folder / "study.toml").write_text(text)
    assert load_study(folder).config.data_date == "2026-11-01"


def test_toml_syntax_error(study):
    folder = study.write()
    (folder / "study.toml").write_text('[study]\nname = Tiny\n')
    with pytest.raises(InputError, match=r"study\.toml:2:-: found a TOML syntax error: .*line 2"):
        load_study(folder)


def test_no_study_file(tmp_path):
    with pytest.raises(InputError, match=r"study\.toml:-:-: found no study\.toml in"):
        load_study(tmp_path)


def test_warming_out_of_range(study):
    study.config["scenario"]["warming_c"] = -2
    with pytest.raises(InputError, match=r"study\.toml:-:\[scenario\] warming_c: found -2; expected a number greater than 0"):
        load_study(study.write())


def _existing_stage_sections():
    out = []
    for section, module in SECTION_MODULES.items():
        try:
            mod = importlib.import_module(module)
        except ModuleNotFoundError:
            continue
        if isinstance(getattr(mod, "PARAMS", None), type) and issubclass(mod.PARAMS, Params):
            out.append(section)
    return out


def test_stage_sections_become_params(study):
    sections = _existing_stage_sections()
    if not sections:
        pytest.skip("no stage defines PARAMS yet")
    s = load_study(study.write())
    for section in sections:
        module = importlib.import_module(SECTION_MODULES[section])
        assert isinstance(s.config.params(section), module.PARAMS)
        assert s.config.params(section) == module.PARAMS()  # absent section -> defaults


def test_unknown_stage_option_is_reported(study):
    sections = _existing_stage_sections()
    if not sections:
        pytest.skip("no stage defines PARAMS yet")
    section = sections[0]
    study.config[section] = {"no_such_option": 1}
    with pytest.raises(InputError, match=rf"study\.toml:-:\[{section}\] no_such_option: found unknown option "
                                         rf"'no_such_option' in \[{section}\]"):
        load_study(study.write())
