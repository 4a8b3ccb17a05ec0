"""The bundled ICS time scale: lookups against the chart, table invariants, name matching."""
import numpy as np
import pandas as pd
import pytest

from analog.reference import (CHART_VERSION, load_timescale, normalize_stage_name, resolve_stage,
                              resolve_stages, suggest_stages)


def test_chart_version_is_named():
    assert CHART_VERSION == "v2023/09"
    t = load_timescale()
    assert t["source"].str.contains("v2023/09").all()


# Base ages, ICS International Chronostratigraphic Chart v2023/09 (Cohen et al. 2013, updated),
# as listed in the project's METHODS.md and read in a public v2023/09 rendering.
ICS_V2023_09_BASES = [
    ("Induan", 251.902),          # Permian-Triassic boundary, ±0.024
    ("Hettangian", 201.4),        # Triassic-Jurassic boundary, ±0.2
    ("Toarcian", 184.2),          # ±0.3
    ("Turonian", 93.9),           # no ± on v2023/09
    ("Danian", 66.0),             # Cretaceous-Paleogene boundary
    ("Ypresian", 56.0),           # Paleocene-Eocene boundary
    ("Wuchiapingian", 259.51),    # ±0.21
    ("Aptian", 121.4),            # "~121.4"
    ("Carnian", 237.0),           # "~237"
    ("Norian", 227.0),            # "~227"
    ("Langhian", 15.98),          # 15.97 on v2022/02
    ("Changhsingian", 254.14),    # ±0.07
    ("Meghalayan", 0.0042),
    ("Gelasian", 2.58),           # Quaternary base
    ("Aquitanian", 23.03),        # Neogene base on v2023/09
    ("Berriasian", 145.0),        # "~145.0"
    ("Barremian", 125.77),        # ~129.4 on v2022/02
    ("Fortunian", 538.8),         # Phanerozoic base, ±0.2
]


@pytest.mark.parametrize("name,base", ICS_V2023_09_BASES)
def test_stage_bases_match_ics_v2023_09(name, base):
    oldest, _ = resolve_stage(name)
    assert oldest == pytest.approx(base, abs=1e-9)


@pytest.mark.parametrize("name,base,plusminus", [
    ("Induan", 251.902, 0.024),       # ICS chart v2023/09
    ("Wuchiapingian", 259.51, 0.21),  # ICS chart v2023/09
    ("Hettangian", 201.4, 0.2),       # ICS chart v2023/09
    ("Maastrichtian", 72.1, 0.2),     # ICS chart v2023/09
])
def test_base_uncertainties_match_ics_v2023_09(name, base, plusminus):
    t = load_timescale().set_index("name")
    assert t.loc[name, "oldest_ma"] == pytest.approx(base)
    assert t.loc[name, "base_uncertainty_ma"] == pytest.approx(plusminus)


def test_turonian_has_no_uncertainty_on_this_chart_version():
    # METHODS.md: the ±0.2 on the base Turonian first appears on v2024/12, not v2023/09.
    t = load_timescale().set_index("name")
    assert np.isnan(t.loc["Turonian", "base_uncertainty_ma"])


@pytest.mark.parametrize("name,expected", [
    ("Late Permian", (259.51, 251.902)),       # = Lopingian, ICS v2023/09
    ("Lower Triassic", (251.902, 247.2)),      # ICS v2023/09
    ("Early Jurassic", (201.4, 174.7)),        # = Lower Jurassic, ICS v2023/09
    ("Late Cretaceous", (100.5, 66.0)),        # = Upper Cretaceous, ICS v2023/09
    ("Cretaceous", (145.0, 66.0)),             # ICS v2023/09
    ("Paleocene", (66.0, 56.0)),               # ICS v2023/09
    ("Guadalupian", (273.01, 259.51)),         # ICS v2023/09
    ("Lopingian", (259.51, 251.902)),          # ICS v2023/09
    ("Middle Miocene", (15.98, 11.63)),        # informal: Langhian + Serravallian (common practice)
    ("Holocene", (0.0117, 0.0)),               # ICS v2023/09
])
def test_series_and_system_names_resolve(name, expected):
    assert resolve_stage(name) == pytest.approx(expected)


@pytest.mark.parametrize("variant,official", [
    ("  toarcian ", "Toarcian"),
    ("TOARCIAN", "Toarcian"),
    ("Toarcian Stage", "Toarcian"),
    ("Maestrichtian", "Maastrichtian"),
    ("Viséan", "Visean"),
    ("late  pleistocene", "Upper Pleistocene"),
    ("Middle Pleistocene", "Chibanian"),
    ("Changxingian", "Changhsingian"),
    ("Stage 5", "Wuliuan"),
    ("Early–Jurassic".replace("–", " "), "Lower Jurassic"),
    ("Jurassic Period", "Jurassic"),
])
def test_variants_resolve_like_the_official_name(variant, official):
    assert resolve_stage(variant) == resolve_stage(official)
    assert resolve_stage(variant) is not None


@pytest.mark.parametrize("bad", ["Toarican", "", "   ", None, 3.5, "Stage", "Jurrasic Period x"])
def test_unknown_names_give_none(bad):
    assert resolve_stage(bad) is None


def test_normalize_only_rewrites_the_leading_word():
    assert normalize_stage_name("Early Jurassic") == "lower jurassic"
    assert normalize_stage_name("Late Early Jurassic") == "upper early jurassic"
    assert normalize_stage_name("Stage 10") == "stage 10"


def test_resolve_stages_is_vectorized_and_keeps_the_index():
    names = pd.Series(["Toarcian", None, "nonsense", " late permian", "Toarcian"], index=[10, 11, 12, 13, 14])
    out = resolve_stages(names)
    assert list(out.columns) == ["oldest_ma", "youngest_ma"]
    assert list(out.index) == [10, 11, 12, 13, 14]
    assert out.dtypes.tolist() == [np.dtype("float64")] * 2
    assert out.loc[10].tolist() == [184.2, 174.7]
    assert out.loc[[11, 12]].isna().all().all()
    assert out.loc[13].tolist() == [259.51, 251.902]
    # Agrees with the scalar lookup on every row.
    for i, name in names.items():
        hit = resolve_stage(name)
        if hit is None:
            assert out.loc[i].isna().all()
        else:
            assert tuple(out.loc[i]) == hit


def test_resolve_stages_on_empty_series():
    out = resolve_stages(pd.Series([], dtype="str"))
    assert out.shape == (0, 2)


@pytest.mark.parametrize("typo,best", [
    ("Toarican", "Toarcian"),
    ("Plienbachian", "Pliensbachian"),
    ("Maastrictian", "Maastrichtian"),
    ("Wuchiapingain", "Wuchiapingian"),
    ("Hettangien", "Hettangian"),
])
def test_suggestions_for_misspelled_stages(typo, best):
    sug = suggest_stages(typo)
    assert sug[0] == best
    assert 1 <= len(sug) <= 3
    assert len(set(sug)) == len(sug)


def test_suggestions_map_aliases_to_official_names_and_respect_n():
    sug = suggest_stages("Maestrictian", n=1)
    assert sug == ["Maastrichtian"]
    assert suggest_stages("") == []
    assert suggest_stages("qqqqqqqqqqqq") == []


# ---- table invariants -------------------------------------------------------------------

def test_table_columns_and_ranks():
    t = load_timescale()
    assert list(t.columns) == ["name", "rank", "parent_series", "parent_system", "oldest_ma",
                               "youngest_ma", "base_uncertainty_ma", "source", "aliases"]
    assert set(t["rank"]) <= {"stage", "subseries", "series", "subsystem", "system", "erathem", "eonothem"}
    assert t["name"].is_unique
    assert (t["oldest_ma"] > t["youngest_ma"]).all()
    assert (t["youngest_ma"] >= 0).all()
    assert (t["source"].str.len() > 0).all()


def test_load_timescale_returns_an_independent_copy():
    a = load_timescale()
    a.loc[0, "oldest_ma"] = -1.0
    assert load_timescale().loc[0, "oldest_ma"] != -1.0


def test_stages_and_pridoli_tile_the_phanerozoic_without_gaps():
    t = load_timescale()
    units = t[(t["rank"] == "stage") | (t["name"] == "Pridoli")].sort_values("youngest_ma")
    assert units["youngest_ma"].iloc[0] == 0.0
    assert units["oldest_ma"].iloc[-1] == pytest.approx(538.8)
    # Each unit's top is the base of the next younger one.
    np.testing.assert_allclose(units["youngest_ma"].to_numpy()[1:], units["oldest_ma"].to_numpy()[:-1])
    assert (t["rank"] == "stage").sum() == 101  # ICS v2023/09 Phanerozoic stages (Pridoli has none)


def test_higher_units_span_exactly_their_stages():
    t = load_timescale()
    stages = t[t["rank"] == "stage"]
    for rank, col in (("series", "parent_series"), ("system", "parent_system")):
        for unit in t[t["rank"] == rank].itertuples():
            members = stages[stages[col] == unit.name]
            if members.empty:  # Pridoli, and informal groupings
                continue
            assert unit.oldest_ma == members["oldest_ma"].max(), unit.name
            assert unit.youngest_ma == members["youngest_ma"].min() or unit.name == "Silurian", unit.name


def test_every_stage_parent_exists():
    t = load_timescale()
    names = set(t["name"])
    stages = t[t["rank"] == "stage"]
    assert set(stages["parent_series"]) <= names
    assert set(stages["parent_system"]) <= names


def test_aliases_never_shadow_an_official_name():
    t = load_timescale()
    official = {normalize_stage_name(n) for n in t["name"]}
    aliases = [a for cell in t["aliases"] for a in cell.split("|") if a]
    assert aliases, "the table should carry aliases"
    assert not official & {normalize_stage_name(a) for a in aliases}
