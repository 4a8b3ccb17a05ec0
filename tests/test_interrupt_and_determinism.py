"""Nothing lost, nothing half-written: inputs untouched, reruns identical, interrupted runs leave no trace."""
from __future__ import annotations

import gc
import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from analog.cli import main
from analog._resources import resource_dir

sys.path.insert(0, str(Path(__file__).resolve().parent / "corpus"))
from corpus_study import TinyStudy, tree_hashes  # noqa: E402


@pytest.fixture
def tiny(tmp_path) -> Path:
    return TinyStudy(tmp_path / "study").write()


def run_quiet(study, out, *extra) -> int:
    return main(["run", str(study), "--out", str(out), "--quiet", *extra])


def without_run_time(manifest_path: Path) -> dict:
    manifest = json.loads(manifest_path.read_text(encoding="utf-8"))
    assert set(manifest["run_time"]) >= {"started_at"}
    manifest.pop("run_time")
    return manifest


def table_bytes(out: Path) -> dict[str, bytes]:
    return {str(p.relative_to(out)): p.read_bytes() for p in sorted(out.rglob("*.csv"))}


def test_inputs_are_never_modified(tiny, tmp_path, capsys):
    before = tree_hashes(tiny)
    stat_before = {p.name: p.stat().st_mtime_ns for p in tiny.iterdir()}
    assert run_quiet(tiny, tmp_path / "out", "--no-figures") == 0
    assert tree_hashes(tiny) == before  # sha256 of every input file
    assert {p.name: p.stat().st_mtime_ns for p in tiny.iterdir()} == stat_before
    assert sorted(p.name for p in tiny.iterdir()) == sorted(before)  # nothing added beside the inputs
    manifest = json.loads((tmp_path / "out" / "manifest.json").read_text(encoding="utf-8"))
    # the manifest records the same hashes (reference: hashlib.sha256 of the file bytes)
    assert {i["path"]: i["sha256"] for i in manifest["inputs"]} == {k: v for k, v in before.items() if k != "study.toml"}


def test_same_seed_gives_identical_tables_and_manifest(tiny, tmp_path, capsys):
    a, b = tmp_path / "a", tmp_path / "b"
    assert run_quiet(tiny, a, "--no-figures") == 0
    assert run_quiet(tiny, b, "--no-figures") == 0
    tables_a, tables_b = table_bytes(a), table_bytes(b)
    assert len(tables_a) >= 15 and "rankings.csv" in tables_a
    assert tables_a.keys() == tables_b.keys()
    for name in tables_a:
        assert tables_a[name] == tables_b[name], name
    assert without_run_time(a / "manifest.json") == without_run_time(b / "manifest.json")


def test_another_seed_changes_the_resampled_tables(tmp_path, capsys):
    # the comparison above can fail: a different seed moves the bootstrap intervals
    outs = []
    for seed in (11, 12):
        s = TinyStudy(tmp_path / f"study{seed}")
        s.config["study"]["seed"] = seed
        outs.append(tmp_path / f"out{seed}")
        assert run_quiet(s.write(), outs[-1], "--no-figures") == 0
    a, b = table_bytes(outs[0]), table_bytes(outs[1])
    assert a["fates.csv"] != b["fates.csv"] or a["rankings.csv"] != b["rankings.csv"]


@pytest.mark.slow
def test_demo_reruns_are_identical(tmp_path, capsys):
    a, b = tmp_path / "a", tmp_path / "b"
    for out in (a, b):
        assert main(["demo", "--out", str(out), "--quiet", "--no-figures"]) == 0
    assert table_bytes(a) == table_bytes(b)
    assert without_run_time(a / "manifest.json") == without_run_time(b / "manifest.json")


@pytest.mark.slow
def test_figures_and_briefing_rerun_identical(tmp_path, capsys):
    s = TinyStudy(tmp_path / "study")
    s.config["figures"] = {"dpi": 72, "formats": ["png", "svg"]}
    study = s.write()
    a, b = tmp_path / "a", tmp_path / "b"
    for out in (a, b):
        assert run_quiet(study, out) == 0
    ha, hb = tree_hashes(a), tree_hashes(b)
    figures = [k for k in ha if k.startswith("figures/")]
    assert figures
    for name in figures + ["briefing.html"]:
        assert ha[name] == hb[name], name


# --- interruption ----------------------------------------------------------------------------------

def _default_sigint():
    # A shell starts background jobs with SIGINT ignored and Python keeps it so; a user's Ctrl-C
    # reaches a foreground process, which this restores.
    signal.signal(signal.SIGINT, signal.SIG_DFL)


def _leftovers(out: Path) -> list[str]:
    return sorted(p.name for p in out.parent.iterdir() if p.name.startswith(f".{out.name}."))


@pytest.fixture
def earlier_output(tmp_path, capsys):
    """A study whose run takes a while to write (figures on), and a complete earlier output of it."""
    s = TinyStudy(tmp_path / "study")
    s.config["figures"] = {"dpi": 72, "formats": ["png"]}
    study = s.write()
    out = tmp_path / "results"
    assert run_quiet(study, out, "--no-figures") == 0
    capsys.readouterr()
    return study, out


def _run_and_signal(study, out, sig) -> tuple[int, str, str]:
    """Start a run, send ``sig`` as soon as its temporary output folder appears, wait for the end."""
    gc.collect()  # no long collection pause in this process between seeing the folder and signalling
    proc = subprocess.Popen([sys.executable, "-m", "analog", "run", str(study), "--out", str(out), "--quiet"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            preexec_fn=_default_sigint, cwd=out.parent)
    try:
        deadline = time.monotonic() + 600
        while not any(n.startswith(f".{out.name}.partial-") for n in _leftovers(out)):
            assert proc.poll() is None, "the run ended before it started writing: " + proc.stderr.read()
            assert time.monotonic() < deadline, "no temporary output folder appeared"
            time.sleep(0.01)
        proc.send_signal(sig)
        stdout, stderr = proc.communicate(timeout=300)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
    return proc.returncode, stdout, stderr


@pytest.mark.slow
@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGTERM], ids=["SIGINT", "SIGTERM"])
def test_interrupted_run_leaves_earlier_output_intact(sig, earlier_output):
    """The signal lands while the run writes (the usual case): exit 130, earlier output unchanged.

    The signal is sent as soon as the temporary folder shows up, but on a busy machine this
    process can be held up long enough for the run to finish first. That is the other allowed
    outcome (a complete new output, exit 0) and is checked as such; then the run is repeated,
    and at least one of three attempts must be interrupted while writing.
    """
    study, out = earlier_output
    for _attempt in range(3):
        before = tree_hashes(out)
        code, stdout, stderr = _run_and_signal(study, out, sig)
        assert "Traceback" not in stderr + stdout
        assert _leftovers(out) == []
        if code == 130:
            assert "interrupted: nothing was written; any earlier output folder is unchanged." in stderr
            assert tree_hashes(out) == before
            return
        # the run committed before the signal arrived: the new output is whole, figures included
        assert code == 0, stderr
        after = tree_hashes(out)
        assert "manifest.json" in after and any(k.startswith("figures/") for k in after)
    pytest.fail("three runs in a row finished before the signal arrived; none was interrupted while writing")


def test_earlier_output_is_replaced_whole_on_success(earlier_output, capsys):
    study, out = earlier_output
    (out / "stale_table.csv").write_text("x\n1\n")  # as if an older version wrote another table
    assert run_quiet(study, out, "--no-figures") == 0
    assert not (out / "stale_table.csv").exists() and (out / "manifest.json").exists()
    assert _leftovers(out) == []


def test_folder_with_foreign_files_is_refused_and_untouched(earlier_output, capsys):
    study, out = earlier_output
    (out / "manifest.json").unlink()  # no longer an analog output folder: these are someone's files
    (out / "my_note.txt").write_text("precious")
    before = tree_hashes(out)
    assert run_quiet(study, out, "--no-figures") == 2
    assert "already holds other files" in capsys.readouterr().err
    assert tree_hashes(out) == before and _leftovers(out) == []
