"""The output writer: atomic, deterministic, never clobbers foreign folders."""
import os

import matplotlib.pyplot as plt
import pandas as pd
import pytest

from analog.errors import InputError
from analog.output import OutputFolder, frame_to_csv_bytes, render_figure


def test_commit_replaces_earlier_output_whole(tmp_path):
    out = tmp_path / "out"
    with OutputFolder(out) as f:
        f.write_text("a.txt", "first")
        f.write_json("manifest.json", {"x": 1})
        f.commit()
    with OutputFolder(out) as f:
        f.write_text("b.txt", "second")
        f.write_json("manifest.json", {"x": 2})
        f.commit()
    assert sorted(p.name for p in out.iterdir()) == ["b.txt", "manifest.json"]
    # no temporary or backup folders left beside the target
    assert [p.name for p in tmp_path.iterdir()] == ["out"]


def test_failure_midway_leaves_earlier_output_and_no_partial_files(tmp_path):
    out = tmp_path / "out"
    with OutputFolder(out) as f:
        f.write_text("keep.txt", "earlier")
        f.write_json("manifest.json", {})
        f.commit()
    with pytest.raises(KeyboardInterrupt):
        with OutputFolder(out) as f:
            f.write_text("half.txt", "partial")
            raise KeyboardInterrupt
    assert (out / "keep.txt").read_text() == "earlier"
    assert not (out / "half.txt").exists()
    assert [p.name for p in tmp_path.iterdir()] == ["out"]


@pytest.mark.parametrize("during", ["making the temporary folder", "the swap"])
def test_signal_while_signals_are_held_is_delivered_after_and_leaves_no_trace(tmp_path, monkeypatch, during):
    """A SIGTERM that arrives while the folder is made or swapped lands on leaving the held section."""
    import signal
    import tempfile

    import analog.output as output

    def raise_interrupt(signum, frame):
        raise KeyboardInterrupt
    old = signal.signal(signal.SIGTERM, raise_interrupt)
    out = tmp_path / "out"
    try:
        if during == "the swap":
            real_rename = os.rename

            def rename_then_signal(a, b):
                real_rename(a, b)
                if ".partial-" in str(a):
                    os.kill(os.getpid(), signal.SIGTERM)
            monkeypatch.setattr(output.os, "rename", rename_then_signal)
            with pytest.raises(KeyboardInterrupt), OutputFolder(out) as f:
                f.write_json("manifest.json", {})
                f.commit()
            # the signal came after the swap was decided: the new output is whole
            assert (out / "manifest.json").read_text() == "{}\n"
        else:
            real_mkdtemp = tempfile.mkdtemp

            def mkdtemp_then_signal(*a, **k):
                made = real_mkdtemp(*a, **k)
                os.kill(os.getpid(), signal.SIGTERM)
                return made
            monkeypatch.setattr(output.tempfile, "mkdtemp", mkdtemp_then_signal)
            with pytest.raises(KeyboardInterrupt):
                OutputFolder(out)
            assert not out.exists()
    finally:
        signal.signal(signal.SIGTERM, old)
    assert [p.name for p in tmp_path.iterdir()] == (["out"] if during == "the swap" else [])


def test_refuses_folder_with_foreign_files(tmp_path):
    (tmp_path / "notes.docx").write_text("precious")
    with pytest.raises(InputError, match="already holds other files"):
        OutputFolder(tmp_path)
    assert (tmp_path / "notes.docx").read_text() == "precious"


def test_refuses_file_as_output_folder(tmp_path):
    target = tmp_path / "file.txt"
    target.write_text("x")
    with pytest.raises(InputError, match="a file where the output folder should be"):
        OutputFolder(target)


@pytest.mark.skipif(os.geteuid() == 0, reason="root can write to read-only folders")
def test_refuses_read_only_parent(tmp_path):
    ro = tmp_path / "ro"
    ro.mkdir()
    ro.chmod(0o500)
    try:
        with pytest.raises(InputError, match="cannot write"):
            OutputFolder(ro / "out")
    finally:
        ro.chmod(0o700)


def test_csv_bytes_are_deterministic_and_unix_newlines():
    frame = pd.DataFrame({"a": [0.1 + 0.2, 1 / 3], "b": ["x", "y"]})
    data = frame_to_csv_bytes(frame)
    assert data == frame_to_csv_bytes(frame.copy())
    assert b"\r\n" not in data
    assert data.splitlines()[1] == b"0.3,x"  # %.6g rounding of 0.30000000000000004


@pytest.mark.parametrize("fmt", ["png", "svg", "pdf"])
def test_figure_rendering_is_byte_identical(fmt):
    def draw():
        fig, ax = plt.subplots()
        ax.plot([0, 1, 2], [1, 0, 1])
        return fig

    a, b = draw(), draw()
    assert render_figure(a, fmt, dpi=50) == render_figure(b, fmt, dpi=50)
    plt.close("all")


def test_geopackage_layer_is_byte_identical_on_a_rerun(tmp_path):
    # GeoPackage stores the write time in gpkg_contents.last_change (OGC GeoPackage 1.3,
    # table 5); it is fixed, so two writes give the same file
    import sqlite3

    import geopandas as gpd
    from shapely.geometry import box

    from analog.output import LAYER_TIMESTAMP

    layer = gpd.GeoDataFrame({"region_id": ["a", "b"]}, geometry=[box(0, 0, 1, 1), box(1, 0, 2, 1)],
                             crs="EPSG:4326")
    files = []
    for name in ("first", "second"):
        with OutputFolder(tmp_path / name) as folder:
            folder.write_layer("regions.gpkg", layer, layer="regions")
            files.append(folder.commit() / "regions.gpkg")
    assert files[0].read_bytes() == files[1].read_bytes()
    with sqlite3.connect(files[0]) as con:
        assert con.execute("select last_change from gpkg_contents").fetchall() == [(LAYER_TIMESTAMP,)]
