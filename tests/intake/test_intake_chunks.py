"""Chunked reading of text tables: any block size gives the same study and the same messages.

Large Darwin Core exports are streamed in blocks (``chunk_bytes``); each block is typed as it is
read and the checks run on the joined table. These tests force tiny blocks so that a small study
spans many chunks, and compare with a one-shot read (a block larger than the file).
"""
from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest

from analog.errors import InputError
from analog.intake import load_study
from analog.intake.findings import Findings
from analog.intake.readers import read_table

ONE_SHOT = 1 << 26


def _load(folder, chunk_bytes):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return load_study(folder, chunk_bytes=chunk_bytes)


def _error(folder, chunk_bytes) -> str:
    with pytest.raises(InputError) as info:
        _load(folder, chunk_bytes)
    return str(info.value)


def _many_modern(study, n=240):
    """Modern records repeated to n rows, with Darwin Core columns the tool ignores."""
    base = study.modern
    reps = -(-n // len(base))
    modern = pd.concat([base] * reps, ignore_index=True).iloc[:n].copy()
    modern["occurrenceID"] = [f"m{i:04d}" for i in range(n)]
    modern["basisOfRecord"] = "HumanObservation"
    modern["eventDate"] = "2001-05-17"
    modern["recordedBy"] = "Invented observer, \"quoted\"; with commas, too"
    return modern


def _assert_same_study(a, b):
    for name in ("taxa", "fossil_occurrences", "modern_occurrences", "intervals", "dropped"):
        pd.testing.assert_frame_equal(getattr(a, name), getattr(b, name), check_exact=True)
    assert a.warnings == b.warnings
    assert [(f.role, f.rows, f.sha256) for f in a.files] == [(f.role, f.rows, f.sha256) for f in b.files]


@pytest.mark.parametrize("chunk_bytes", [40, 97, 512])
def test_tiny_chunks_give_the_same_study(study, chunk_bytes):
    study.modern = _many_modern(study)
    # faults that leave rows out (with warnings naming rows) spread over many chunks
    study.modern.loc[[5, 130, 231], "decimalLatitude"] = ""
    study.modern.loc[[17, 199], "scientificName"] = "Nonexistia"
    study.modern.loc[150, "occurrenceID"] = "m0003"   # repeats row 5's identifier (a warning)
    folder = study.write()
    one = _load(folder, ONE_SHOT)
    many = _load(folder, chunk_bytes)
    _assert_same_study(one, many)
    assert len(many.modern_occurrences) == 240 - 3 - 2
    # row numbers across chunk boundaries: spreadsheet rows = position + 2
    assert any("rows 7, 132, 233" in w for w in many.warnings), many.warnings
    assert any("m0003" in w and "row 5" in w for w in many.warnings), many.warnings


def test_tiny_chunks_give_the_same_errors_with_global_row_numbers(study):
    study.modern = _many_modern(study)
    study.modern.loc[[3, 120, 238], "decimalLatitude"] = ["95.5", "abc", "-91"]
    study.modern.loc[[60, 61], "decimalLongitude"] = ["181", "12,5"]
    study.fossils = pd.concat([study.fossils] * 20, ignore_index=True)
    study.fossils["occurrenceID"] = [f"f{i}" for i in range(len(study.fossils))]
    study.fossils.loc[[2, 100, 201], "oldest_ma"] = "-3"
    study.fossils.loc[199, "youngest_ma"] = "9999"      # older than oldest_ma: age order
    study.fossils.loc[150, "locationID"] = "  "          # blank required cell
    folder = study.write()
    one = _error(folder, ONE_SHOT)
    for chunk_bytes in (33, 128):
        assert _error(folder, chunk_bytes) == one
    # the rows are where the cells were put (header = row 1, first record = row 2)
    assert "modern_occurrences.csv:5:decimalLatitude: found '95.5'" in one
    assert "modern_occurrences.csv:122:decimalLatitude: found 'abc' (not a number)" in one
    assert "modern_occurrences.csv:240:decimalLatitude: found '-91'" in one
    assert "modern_occurrences.csv:63:decimalLongitude: found '12,5' (not a number)" in one
    assert "fossil_occurrences.csv:102:oldest_ma: found '-3'" in one
    assert "fossil_occurrences.csv:203:oldest_ma: found '-3'" in one
    assert "fossil_occurrences.csv:201:oldest_ma: found oldest_ma" in one
    assert "fossil_occurrences.csv:152:locationID: found a blank cell" in one


def test_more_than_twenty_faults_are_listed_then_counted_across_chunks(study):
    study.modern = _many_modern(study)
    study.modern.loc[::4, "decimalLongitude"] = "200"   # 60 rows
    folder = study.write()
    one = _error(folder, ONE_SHOT)
    assert _error(folder, 50) == one
    lines = [ln for ln in one.splitlines() if ":decimalLongitude:" in ln or "more rows" in ln]
    assert len(lines) == 21 and "... and 40 more rows with the same fault (rows 82, 86, 90, 94, 98 and 35 more)" in one


def test_semicolons_bom_and_decimal_commas_in_chunks(study):
    study.modern = _many_modern(study, 120)
    study.modern["decimalLatitude"] = study.modern["decimalLatitude"].str.replace(".", ",", regex=False)
    study.sep = ";"
    study.encoding = "utf-8-sig"
    folder = study.write()
    one = _load(folder, ONE_SHOT)
    _assert_same_study(one, _load(folder, 64))
    assert one.modern_occurrences["decimalLatitude"].iloc[5] == 1.5  # '1,5' read as 1.5


def test_record_longer_than_a_block_is_read_whole(study):
    study.modern = _many_modern(study, 30)
    study.modern.loc[7, "recordedBy"] = "A very long remark, " * 40 + "\nspanning a line break"
    folder = study.write()
    _assert_same_study(_load(folder, ONE_SHOT), _load(folder, 64))


def test_chunks_cover_the_file_in_order_and_keep_only_needed_columns(study):
    study.modern = _many_modern(study, 200)
    folder = study.write()

    def convert(frame, start, delimiter):
        return start, frame, delimiter

    findings = Findings()
    tf = read_table(folder / "modern_occurrences.csv", label="modern_occurrences.csv", key="modern_occurrences",
                    findings=findings, wanted={"occurrenceID", "decimalLatitude"}, convert=convert,
                    chunk_bytes=64)
    assert not findings.problems
    assert len(tf.parts) > 10                                    # many chunks
    starts = np.cumsum([0] + [len(frame) for _, frame, _ in tf.parts])
    assert [s for s, _, _ in tf.parts] == list(starts[:-1])      # contiguous, in file order
    assert tf.rows == 200 == starts[-1]
    assert all(list(frame.columns) == ["occurrenceID", "decimalLatitude"] for _, frame, _ in tf.parts)
    assert all(d == "," for _, _, d in tf.parts)
    assert "recordedBy" in tf.columns                            # listed, not read
    joined = pd.concat([frame for _, frame, _ in tf.parts])
    assert joined["occurrenceID"].tolist() == study.modern["occurrenceID"].tolist()
    assert joined.index.tolist() == list(range(200))             # positions in the file


def test_header_only_file_in_chunks(study):
    study.modern = study.modern.iloc[:0]
    folder = study.write()
    assert "modern_occurrences.csv:2:-: found a header but no data rows" in _error(folder, 16)


def test_parquet_numbers_checked_as_numbers_with_the_same_messages(study):
    """Number columns stored as numbers report their cells as a text table would show them."""
    study.modern["decimalLatitude"] = [1.0, 2.0, 3.0, 12.0, 13.0, 100.0, 2.5, np.inf]
    study.modern["decimalLongitude"] = [1.0, 2.0, 3.0, 12.0, 13.0, 1.5, 2.5, 11.0]
    study.fossils["oldest_ma"] = pd.to_numeric(study.fossils["oldest_ma"], errors="coerce")
    study.fossils.loc[0, "oldest_ma"] = -185.0
    for key in ("taxa", "fossil_occurrences", "modern_occurrences"):
        study.config["inputs"][key] = key + ".parquet"
    folder = study.write()
    text = _error(folder, None)
    assert "modern_occurrences.parquet:7:decimalLatitude: found '100.0'" in text
    assert "modern_occurrences.parquet:9:decimalLatitude: found 'inf' (not a number)" in text
    assert "fossil_occurrences.parquet:2:oldest_ma: found '-185.0'" in text
