"""Exit codes and messages of the command line: 0 ok, 2 bad input, 1 internal error, 130 interrupted."""
from __future__ import annotations

import os
import re
import shutil
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest

import analog
from analog import cli
from analog._resources import resource_dir

COMMANDS = {None: "Rank living taxa", "check": "Validate a study folder", "run": "Run the whole job on a study folder",
            "demo": "Run the whole job on the embedded demo study"}
PROBLEM_LINE = re.compile(r"^(?P<file>.+?):(?P<row>\d+|-):(?P<column>.+?): found .+; expected .+; fix: .+$")


def exit_code(argv) -> int:
    """``main`` returns a code; argparse exits through SystemExit (--help, --version, usage errors)."""
    try:
        return cli.main(argv)
    except SystemExit as exc:
        return exc.code


def problem_lines(err: str) -> list[str]:
    lines = err.splitlines()
    head = [i for i, line in enumerate(lines) if re.match(r"^error: \d+ problems? in the input:$", line)]
    assert len(head) == 1, err
    n = int(re.search(r"\d+", lines[head[0]]).group())
    assert lines[head[0] + 1 + n] == "Nothing was written. Fix the problems above and run again."
    return lines[head[0] + 1: head[0] + 1 + n]


def test_version(capsys):
    assert exit_code(["--version"]) == 0
    assert capsys.readouterr().out.strip() == f"analog {analog.__version__}"


@pytest.mark.parametrize("command", list(COMMANDS))
def test_help_on_every_command(command, capsys):
    argv = ["--help"] if command is None else [command, "--help"]
    assert exit_code(argv) == 0
    out = capsys.readouterr().out
    assert out.startswith("usage: analog" + (f" {command}" if command else ""))
    assert COMMANDS[command] in out
    if command in ("run", "demo"):
        assert "--out DIR" in out and "not forecasts" in out


def test_no_command_prints_help_and_exits_2(capsys):
    assert exit_code([]) == 2
    out = capsys.readouterr().out
    assert out.startswith("usage: analog") and "check" in out and "run" in out and "demo" in out


@pytest.mark.parametrize("argv, message", [
    (["frobnicate"], r"invalid choice: 'frobnicate'"),
    (["run", "somewhere"], r"the following arguments are required: --out"),
    (["check"], r"the following arguments are required: STUDY"),
])
def test_usage_errors_exit_2(argv, message, capsys):
    assert exit_code(argv) == 2
    assert re.search(message, capsys.readouterr().err)


def test_check_on_the_demo_prints_the_inventory(capsys):
    demo = resource_dir("demo")
    assert exit_code(["check", str(demo)]) == 0
    out = capsys.readouterr().out
    # counts read straight from the demo files with pandas, independently of intake
    taxa = pd.read_csv(demo / "taxa.csv")
    fossils = pd.read_csv(demo / "fossil_occurrences.csv")
    n_extant = int(taxa["extant"].astype(str).str.lower().eq("true").sum())
    assert out.startswith("Study: Demo: invented fauna of the Orrimar Sea")
    assert f"taxa: {len(taxa)} ({n_extant} extant, {len(taxa) - n_extant} extinct)" in out
    assert f"fossil occurrences: {len(fossils)} at {fossils['locationID'].nunique()} localities" in out
    assert re.search(r"regions: 12 \(CRS EPSG:4326\)", out)
    assert re.search(r"warming intervals with fossil data: \d+ of \d+", out)
    assert "Input files:" in out and "sha256" in out
    assert "Traceback" not in out


@pytest.fixture
def faulty_demo(tmp_path) -> Path:
    """A copy of the demo study with four planted faults, one per line of the expected report."""
    folder = tmp_path / "demo"
    shutil.copytree(resource_dir("demo"), folder)
    fossils = folder / "fossil_occurrences.csv"
    lines = fossils.read_text(encoding="utf-8").split("\n")
    header = lines[0].split(",")
    col = {name: i for i, name in enumerate(header)}

    def edit(row, **cells):
        parts = lines[row - 1].split(",")
        assert len(parts) == len(header)  # the demo rows hold no quoted commas
        for name, value in cells.items():
            parts[col[name]] = value
        lines[row - 1] = ",".join(parts)

    edit(10, decimalLatitude="123.4")                                             # bad latitude
    edit(20, oldest_ma="", youngest_ma="", earliestAgeOrLowestStage="Toarcain",   # unknown stage
         latestAgeOrHighestStage="Toarcian")
    edit(30, taxon_id="T9999")                                                    # dangling taxon reference
    fossils.write_text("\n".join(lines), encoding="utf-8")
    modern = folder / "modern_occurrences.csv"
    table = pd.read_csv(modern, dtype=str, keep_default_na=False)
    table.drop(columns="decimalLongitude").to_csv(modern, index=False)          # missing column
    return folder


FOUR_FAULTS = [
    r"^fossil_occurrences\.csv:10:decimalLatitude: found '123\.4'; expected a number between -90 and 90",
    r"^fossil_occurrences\.csv:20:earliestAgeOrLowestStage: found unknown stage 'Toarcain' \(closest: Toarcian",
    r"^fossil_occurrences\.csv:30:taxon_id: found 'T9999'.*; expected a taxon_id of the taxa table",
    r"^modern_occurrences\.csv:1:decimalLongitude: found no column 'decimalLongitude'",
]


def test_demo_with_four_faults_gives_one_line_each_and_writes_nothing(faulty_demo, tmp_path, capsys):
    out = tmp_path / "out"
    before = {p: p.read_bytes() for p in faulty_demo.iterdir()}
    assert exit_code(["run", str(faulty_demo), "--out", str(out)]) == 2
    captured = capsys.readouterr()
    lines = problem_lines(captured.err)
    assert len(lines) == 4, "\n".join(lines)
    for pattern, line in zip(FOUR_FAULTS, sorted(lines, key=lambda s: (s.split(":")[0], int(s.split(":")[1])))):
        assert re.search(pattern, line), line
        assert PROBLEM_LINE.match(line)
    assert "Traceback" not in captured.err + captured.out
    assert not out.exists() and not list(tmp_path.glob(".out.*"))
    assert {p: p.read_bytes() for p in faulty_demo.iterdir()} == before


@pytest.mark.slow
def test_demo_with_four_faults_in_a_process(faulty_demo, tmp_path):
    out = tmp_path / "out"
    proc = subprocess.run([sys.executable, "-m", "analog", "check", str(faulty_demo)],
                          capture_output=True, text=True, timeout=600, cwd=tmp_path)
    assert proc.returncode == 2
    assert "Traceback" not in proc.stderr + proc.stdout
    assert len(problem_lines(proc.stderr)) == 4
    assert not out.exists()


def test_check_of_a_missing_folder_exits_2(tmp_path, capsys):
    assert exit_code(["check", str(tmp_path / "nowhere")]) == 2
    err = capsys.readouterr().err
    assert re.search(r"nowhere:-:-: found no such folder; expected a study folder holding study\.toml", err)


def test_internal_error_exits_1_without_traceback(tmp_path, capsys, monkeypatch):
    def broken(*args, **kwargs):
        raise RuntimeError("planted fault")

    monkeypatch.setattr("analog.intake.load_study", broken)
    assert exit_code(["run", str(resource_dir("demo")), "--out", str(tmp_path / "out")]) == 1
    err = capsys.readouterr().err
    assert re.search(r"^internal error: RuntimeError: planted fault\nThis is a fault in analog, not in your data\. "
                     r"Rerun with --debug", err, re.M)
    assert "Traceback" not in err and not (tmp_path / "out").exists()
    # --debug shows the traceback instead
    with pytest.raises(RuntimeError, match="planted fault"):
        cli.main(["run", str(resource_dir("demo")), "--out", str(tmp_path / "out"), "--debug"])


def test_interrupt_during_intake_exits_130(tmp_path, capsys, monkeypatch):
    def interrupted(*args, **kwargs):
        raise KeyboardInterrupt

    monkeypatch.setattr("analog.intake.load_study", interrupted)
    assert exit_code(["run", str(resource_dir("demo")), "--out", str(tmp_path / "out")]) == 130
    assert "interrupted: nothing was written" in capsys.readouterr().err
    assert not (tmp_path / "out").exists()


@pytest.mark.slow
def test_console_script_and_module_agree(tmp_path):
    script = Path(sys.executable).parent / "analog"
    if not script.exists():
        pytest.skip("console script not installed in this environment")
    a = subprocess.run([str(script), "--version"], capture_output=True, text=True, timeout=120)
    b = subprocess.run([sys.executable, "-m", "analog", "--version"], capture_output=True, text=True, timeout=120)
    assert a.returncode == b.returncode == 0
    assert a.stdout == b.stdout == f"analog {analog.__version__}\n"
    c = subprocess.run([sys.executable, "-m", "analog"], capture_output=True, text=True, timeout=120,
                       env={**os.environ})
    assert c.returncode == 2 and c.stdout.startswith("usage: analog")
