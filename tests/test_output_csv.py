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


@pytest.mark.parametrize("case", ["awkward", "no rows", "one column", "repeated names", "categorical",
                                  "float extension", "dates", "no columns", "number labels"])
def test_same_bytes_as_pandas_to_csv(case):
    frame = _awkward()
    frame = {
        "awkward": frame,
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
