import numpy as np
import pandas as pd
import pytest

from analog.errors import AnalogError
from analog.stats import gower_distance

KINDS = {"size": "numeric", "diet": "categorical", "depth": "ordinal", "motile": "binary"}


@pytest.fixture
def table():
    return pd.DataFrame({
        "size": [1.0, 3.0, np.nan, 7.0],
        "diet": pd.Series(["a", "b", "a", None], dtype="str"),
        "depth": pd.Categorical(["low", "mid", "high", "mid"], categories=["low", "mid", "high"],
                                ordered=True),
        "motile": [True, False, True, True],
    })


def test_hand_worked_case_with_missing_values(table):
    # Gower (1971), eq. for the general coefficient: per-variable scores averaged over the
    # variables present in both objects; numeric |x_i - x_j| / range, categorical and binary
    # 0/1 mismatch. Ordinal by Podani (1999) eqs. 2a-b (formula from memory):
    # ranks over the 4 rows: low 1, mid 2.5 (T = 2), high 4; denominator 4 - 1 - 0 - 0 = 3.
    # low-mid: (1.5 - 0 - 0.5) / 3 = 1/3; low-high: 3/3 = 1; mid-high: (1.5 - 0.5) / 3 = 1/3.
    # size range 7 - 1 = 6.
    d = gower_distance(table, table, KINDS)
    # (0, 1): size 2/6, diet 1, depth 1/3, motile 1            -> (1/3 + 1 + 1/3 + 1) / 4
    assert d[0, 1] == pytest.approx((1 / 3 + 1 + 1 / 3 + 1) / 4)
    # (0, 2): size missing in row 2 -> dropped; diet 0, depth 1, motile 0 -> 1/3
    assert d[0, 2] == pytest.approx(1 / 3)
    # (0, 3): size 6/6, diet missing in row 3; depth 1/3, motile 0 -> (1 + 1/3 + 0) / 3
    assert d[0, 3] == pytest.approx((1 + 1 / 3) / 3)
    # (2, 3): size and diet dropped; depth mid-high 1/3, motile 0 -> 1/6
    assert d[2, 3] == pytest.approx(1 / 6)
    # (1, 3): size 4/6, diet dropped, depth mid-mid 0, motile 1 -> (2/3 + 0 + 1) / 3
    assert d[1, 3] == pytest.approx((2 / 3 + 1) / 3)


def test_rank_option_without_tie_correction(table):
    # Podani (1999), eq. 3: |r_i - r_j| / (r_max - r_min); low-mid = 1.5 / 3 = 0.5
    d = gower_distance(table, table, KINDS, ordinal="ranks")
    assert d[0, 1] == pytest.approx((1 / 3 + 1 + 0.5 + 1) / 4)


def test_cross_distances_pool_both_sets(table):
    # a (4 rows) against its first 2 rows: ranks over 6 objects: low x2 -> 1.5, mid x3 -> 4,
    # high -> 6; Podani denominator 6 - 1.5 - 0 - (2 - 1)/2 = 4; low-mid (2.5 - 0.5 - 1) / 4
    d = gower_distance(table, table.iloc[:2], KINDS)
    assert d.shape == (4, 2)
    assert d[0, 1] == pytest.approx((1 / 3 + 1 + 1 / 4 + 1) / 4)
    assert d[0, 0] == 0.0


def test_properties_on_random_mixed_data():
    rng = np.random.default_rng(4)
    n = 25
    frame = pd.DataFrame({
        "size": rng.lognormal(size=n),
        "diet": rng.choice(["a", "b", "c"], n),
        "depth": rng.integers(1, 5, n),          # numeric codes: ordinal in numeric order
        "motile": rng.integers(0, 2, n),
    })
    frame.loc[rng.random(n) < 0.15, "size"] = np.nan
    frame.loc[rng.random(n) < 0.15, "diet"] = None
    d = gower_distance(frame, frame, KINDS)
    assert d.shape == (n, n)
    np.testing.assert_allclose(d, d.T)
    np.testing.assert_array_equal(np.diag(d), 0.0)
    assert np.nanmin(d) >= 0.0 and np.nanmax(d) <= 1.0
    np.testing.assert_allclose(d, _brute_force(frame, frame, KINDS), atol=1e-12)


def _brute_force(a, b, kinds):
    """Pair-by-pair loop straight from Gower (1971) and Podani (1999) eqs. 2a-b."""
    pooled = pd.concat([a, b]) if b is not a else a
    cols = {}
    for col in kinds:
        vals = pooled[col].dropna().to_numpy()
        cols[col] = (a[col].to_numpy(dtype=object), b[col].to_numpy(dtype=object), vals)
    out = np.full((len(a), len(b)), np.nan)
    for i in range(len(a)):
        for j in range(len(b)):
            num = den = 0.0
            for col, kind in kinds.items():
                col_a, col_b, vals = cols[col]
                xi, xj = col_a[i], col_b[j]
                if pd.isna(xi) or pd.isna(xj):
                    continue
                if kind == "numeric":
                    s = abs(xi - xj) / (vals.max() - vals.min())
                elif kind == "ordinal":
                    order = np.sort(vals.astype(float))

                    def rank(x):
                        return np.mean(np.flatnonzero(order == x) + 1)

                    def ties(x):
                        return np.sum(order == x)
                    if xi == xj:
                        s = 0.0
                    else:
                        top, bottom = order[-1], order[0]
                        s = ((abs(rank(xi) - rank(xj)) - (ties(xi) - 1) / 2 - (ties(xj) - 1) / 2)
                             / (rank(top) - rank(bottom) - (ties(top) - 1) / 2
                                - (ties(bottom) - 1) / 2))
                else:
                    s = float(xi != xj)
                num += s
                den += 1
            if den:
                out[i, j] = num / den
    return out


def test_cross_distances_match_brute_force():
    rng = np.random.default_rng(9)
    a = pd.DataFrame({"size": rng.normal(size=7), "diet": rng.choice(["a", "b"], 7),
                      "depth": rng.integers(0, 3, 7), "motile": rng.integers(0, 2, 7)})
    b = pd.DataFrame({"size": rng.normal(size=5), "diet": rng.choice(["a", "c"], 5),
                      "depth": rng.integers(0, 4, 5), "motile": rng.integers(0, 2, 5)})
    np.testing.assert_allclose(gower_distance(a, b, KINDS), _brute_force(a, b, KINDS), atol=1e-12)


def test_pair_without_shared_variables_is_nan():
    a = pd.DataFrame({"x": [1.0, np.nan], "c": [None, "p"]})
    b = pd.DataFrame({"x": [np.nan, 2.0], "c": ["q", None]})
    d = gower_distance(a, b, {"x": "numeric", "c": "categorical"})
    assert np.isnan(d[0, 0]) and np.isnan(d[1, 1])
    assert d[0, 1] == 1.0 and d[1, 0] == 1.0   # x: |1 - 2| / 1 ; c: p vs q


def test_weights_and_fixed_ranges():
    a = pd.DataFrame({"x": [0.0, 10.0], "c": ["p", "q"]})
    kinds = {"x": "numeric", "c": "categorical"}
    # weighted mean of per-variable scores (Gower 1971): (3 * 1 + 1 * 1) / 4
    assert gower_distance(a, a, kinds, weights={"x": 3})[0, 1] == pytest.approx(1.0)
    # range fixed at 40: x score 10/40; (0.25 + 1) / 2
    assert gower_distance(a, a, kinds, ranges={"x": 40})[0, 1] == pytest.approx(0.625)
    # zero weight removes the variable
    assert gower_distance(a, a, kinds, weights={"c": 0})[0, 1] == pytest.approx(1.0)


def test_levels_give_the_order_and_constant_columns_score_zero():
    a = pd.DataFrame({"grade": ["small", "large", "medium"], "k": [5.0, 5.0, 5.0]})
    kinds = {"grade": "ordinal", "k": "numeric"}
    d = gower_distance(a, a, kinds, levels={"grade": ["small", "medium", "large"]})
    # ranks 1, 3, 2 without ties: Podani reduces to |r_i - r_j| / 2; k is constant (score 0)
    assert d[0, 1] == pytest.approx((1.0 + 0.0) / 2)
    assert d[0, 2] == pytest.approx((0.5 + 0.0) / 2)


@pytest.mark.parametrize("kinds, kwargs, message", [
    ({"size": "interval"}, {}, "kind of column 'size' was 'interval'"),
    ({"nope": "numeric"}, {}, "column 'nope' named in `kinds` is not in a and b"),
    ({"diet": "numeric"}, {}, "numeric column 'diet' holds non-numeric values"),
    ({"diet": "ordinal"}, {}, "ordinal column 'diet' has no order"),
    ({"diet": "ordinal"}, {"levels": {"diet": ["a"]}}, "values not in its levels: b"),
    ({"size": "numeric"}, {"ranges": {"size": 0}}, "must be finite and > 0"),
    ({"size": "numeric"}, {"weights": {"size": -1}}, "must be finite and >= 0"),
    ({"size": "numeric"}, {"ordinal": "metric"}, "`ordinal` was 'metric'"),
])
def test_errors(table, kinds, kwargs, message):
    with pytest.raises(AnalogError, match=message):
        gower_distance(table, table, kinds, **kwargs)


def test_binary_with_three_values_is_rejected():
    a = pd.DataFrame({"flag": ["y", "n", "maybe"]})
    with pytest.raises(AnalogError, match="binary column 'flag' holds 3 distinct values"):
        gower_distance(a, a, {"flag": "binary"})


def test_blocks_equal_whole_matrix_for_any_block_size():
    # ranges and ordinal ranks are fixed from the whole tables, so a block of rows is the
    # same slice of the whole matrix whatever the block size
    rng = np.random.default_rng(7)
    n = 23
    a = pd.DataFrame({"x": rng.normal(size=n), "c": rng.choice(["p", "q", "r"], n),
                      "o": rng.choice(["low", "mid", "high"], n), "b": rng.integers(0, 2, n).astype(float)})
    a.loc[::5, "x"] = np.nan
    a.loc[::7, "o"] = None
    b = a.sample(frac=0.7, random_state=1).reset_index(drop=True)
    kinds = {"x": "numeric", "c": "categorical", "o": "ordinal", "b": "binary"}
    levels = {"o": ["low", "mid", "high"]}
    from analog.stats.gower import gower_blocks
    whole = gower_distance(a, b, kinds, levels=levels)
    for size in (1, 4, n, 100):
        parts = list(gower_blocks(a, b, kinds, levels=levels, block_rows=size))
        assert [r.start for r, _ in parts] == list(range(0, n, size))
        np.testing.assert_array_equal(np.vstack([d for _, d in parts]), whole)


@pytest.mark.parametrize("order", [("c", "o", "b", "x", "c2"), ("x", "c", "o"), ("c", "o", "b", "c2"),
                                   ("gone", "c", "x", "o")])
@pytest.mark.parametrize("ordinal", ["podani", "ranks"])
def test_tabulated_class_variables_give_the_row_by_row_numbers(order, ordinal):
    # the leading class variables are summed once per pair of distinct value combinations and
    # looked up; the numbers must be bit for bit those of the row-by-row sums
    from analog.stats.gower import _plan, _rows

    rng = np.random.default_rng(11)
    n = 40
    a = pd.DataFrame({"x": rng.normal(size=n), "c": rng.choice(["p", "q", "r"], n),
                      "o": rng.choice(["low", "mid", "high"], n), "b": rng.integers(0, 2, n).astype(float),
                      "c2": rng.choice(["u", "v"], n), "gone": None})
    for col, step in (("x", 5), ("c", 7), ("o", 3), ("b", 11)):
        a.loc[::step, col] = None
    b = a.sample(frac=0.6, random_state=2).reset_index(drop=True)
    kinds = {"x": "numeric", "c": "categorical", "o": "ordinal", "b": "binary", "c2": "categorical",
             "gone": "categorical"}
    kinds = {k: kinds[k] for k in order}
    weights = {k: w for k, w in zip(order, (1.0, 0.5, 2.0, 0.0, 1.3))}
    plan = _plan(a, b, kinds, levels={"o": ["low", "mid", "high"]}, weights=weights, ranges=None,
                 ordinal=ordinal)
    assert (plan[3] is not None) == (order[0] != "x")
    row_by_row = plan[:3] + (None,)
    for rows in (slice(0, n), slice(3, 17)):
        np.testing.assert_array_equal(_rows(plan, rows), _rows(row_by_row, rows))
