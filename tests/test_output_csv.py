"""frame_to_csv_bytes writes the same bytes as pandas' own to_csv with the tool's settings."""
from __future__ import annotations

import io

import numpy as np
import pandas as pd
import pytest

from analog.output import FLOAT_FORMAT, frame_to_csv_bytes


def _pandas(frame: pd.DataFrame) -> bytes:
    """Reference: pandas.DataFrame.to_csv with the tool's float format and line ending."""
    buf = io.StringIO()
    frame.to_csv(buf, index=False, float_format=FLOAT_FORMAT, lineterminator="\n")
    return buf.getvalue().encode("utf-8")


def _awkward(n: int = 7) -> pd.DataFrame:
    rng = np.random.default_rng(3)
    floats = np.concatenate([[0.1, -0.0, np.inf, -np.inf, np.nan, 1e-300, 123456789.0, 0.000123456789, 999999.5,
                              1234565.0, -2.5e-5, 1e22],
                             rng.normal(0, 1e3, n), rng.uniform(-1, 1, n) * 10.0 ** rng.integers(-8, 9, n)])
    k = len(floats)
    text = np.array(["a,b", 'q"uote', "line\nbreak", "cr\rx", "", " sp ", "é—∞", "plain"], dtype=object)
    return pd.DataFrame({
        "f": floats,
        "f32": floats.astype(np.float32),
        "i": np.arange(k) - 5,
        "u": np.arange(k, dtype=np.uint16),
        "b": np.arange(k) % 3 == 0,
        "s": pd.array([None if j % 5 == 4 else text[j % len(text)] for j in range(k)], dtype="str"),
        "S": pd.array([None if j % 4 == 1 else text[j % len(text)] for j in range(k)], dtype="string"),
        "o": np.array([[None, np.nan, "x,y", 3, 1.5, np.float64(0.25), pd.NA, True][j % 8] for j in range(k)],
                      dtype=object),
        "I": pd.array([None if j % 3 == 2 else j for j in range(k)], dtype="Int64"),
        "B": pd.array([None if j % 4 == 0 else bool(j % 2) for j in range(k)], dtype="boolean"),
    })


def _plain(n: int = 3000) -> pd.DataFrame:
    """Fields no writer quotes (the usual output tables), with repeated floats and empty fields."""
    rng = np.random.default_rng(5)
    f = np.round(rng.uniform(-40, 40, n), 2)
    f[::7] = np.nan
    return pd.DataFrame({
        "id": pd.array([f"T{i:05d}" for i in range(n)], dtype="str"),
        "name": pd.array([None if i % 9 == 0 else f"Name {i % 50}" for i in range(n)], dtype="str"),
        "x": f, "y": rng.normal(0, 1, n), "k": rng.integers(0, 5, n), "ok": rng.random(n) < 0.5,
        "I": pd.array([None if i % 4 == 0 else i for i in range(n)], dtype="Int64"),
        "o": np.array([None if i % 3 == 0 else "tier" for i in range(n)], dtype=object),
        "empty": pd.array([None] * n, dtype="str"),
    })


@pytest.mark.parametrize("case", ["awkward", "plain", "plain, empty rows", "plain, no rows", "plain, object ints",
                                  "plain, comma in a name", "plain, comma in a header", "no rows", "one column",
                                  "repeated names", "categorical", "float extension", "dates", "no columns",
                                  "number labels"])
def test_same_bytes_as_pandas_to_csv(case):
    frame = _awkward()
    plain = _plain()
    frame = {
        "awkward": frame,
        "plain": plain,
        "plain, empty rows": plain[["name", "empty"]],
        "plain, no rows": plain.iloc[:0],
        "plain, object ints": plain.assign(o=np.array([1, None, 2.5] * 1000, dtype=object)),
        "plain, comma in a name": plain.assign(name=plain["name"].where(plain.index != 5, "a,b")),
        "plain, comma in a header": plain.rename(columns={"x": "x,y"}),
        "no rows": frame.iloc[:0],
        "one column": pd.DataFrame({"a": ["", None, "x", ""]}),
        "repeated names": pd.DataFrame([[1.5, "a", 2]], columns=["x", "x", "y"]),
        "categorical": frame.assign(c=pd.Categorical(["p", None] * (len(frame) // 2) + ["p"] * (len(frame) % 2))),
        "float extension": frame.assign(F=pd.array([0.5, None] * (len(frame) // 2) + [1.0] * (len(frame) % 2),
                                                   dtype="Float64")),
        "dates": frame.assign(d=pd.date_range("2020-01-01", periods=len(frame))),
        "no columns": pd.DataFrame(),
        "number labels": pd.DataFrame({0: [1.5, np.nan], 1: ["a", "b"]}),
    }[case]
    assert frame_to_csv_bytes(frame) == _pandas(frame)


def test_both_writing_paths_are_compared_above():
    """The cases above cover the joined lines (no field needs quotes) and the csv writer."""
    from analog.output import _csv_fields

    assert _csv_fields(_plain())[1] is True
    assert _csv_fields(_plain().assign(name="a,b"))[1] is False
    assert _csv_fields(_awkward())[1] is False
