"""Time each step of the demo run: CPU seconds (this process and its children) and wall seconds.

Not collected by pytest (no ``test_`` prefix); no test asserts a time. Run with

    /work/venv/bin/python tests/benchmarks/demo_timing.py [--out DIR] [--workers N] [--detail]

The run is the one ``analog demo`` makes (intake, the four stages, then the writer: tables,
figures, briefing, manifest); the stage functions, the briefing and the table writers are
wrapped with clocks, and the figures' time is what remains of the writer's. CPU time
(user + sys, child processes included once they have ended) is the steadier number on a
shared machine; on a quiet machine it approximates wall time for work done in one process.
``--detail`` then draws every figure again, timing the layout pass and each format.

The script uses only functions that older versions of the package also have, so the same
script times an earlier checkout: ``PYTHONPATH=/path/to/old/tree python demo_timing.py``
(run from outside the repository so that the old tree is the one imported).
"""
from __future__ import annotations

import argparse
import functools
import os
import sys
import tempfile
import time
from contextlib import contextmanager
from pathlib import Path


def _cpu() -> float:
    t = os.times()
    return t.user + t.system + t.children_user + t.children_system


ROWS: list[tuple[str, float, float]] = []
TOTALS: dict[str, list[float]] = {}


@contextmanager
def timed(label: str):
    c0, w0 = _cpu(), time.perf_counter()
    yield
    ROWS.append((label, _cpu() - c0, time.perf_counter() - w0))


def _clock(owner, name: str, label: str, *, accumulate: bool = False):
    """Wrap ``owner.name`` with a clock (one row per call, or one running total)."""
    fn = getattr(owner, name)

    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        c0, w0 = _cpu(), time.perf_counter()
        try:
            return fn(*args, **kwargs)
        finally:
            dc, dw = _cpu() - c0, time.perf_counter() - w0
            if accumulate:
                tot = TOTALS.setdefault(label, [0.0, 0.0])
                tot[0] += dc
                tot[1] += dw
            else:
                ROWS.append((label, dc, dw))

    setattr(owner, name, wrapper)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--out", default=None, help="output folder (default: a temporary one)")
    ap.add_argument("--workers", type=int, default=None, help="figure processes, where the writer has the option")
    ap.add_argument("--detail", action="store_true", help="also time each figure's layout and formats")
    args = ap.parse_args(argv)
    c_start, w_start = _cpu(), time.perf_counter()
    with timed("import"):
        import inspect
        import warnings

        import analog.analogs
        import analog.briefing
        import analog.combine
        import analog.regions
        import analog.trajectory
        from analog import output
        from analog._resources import resource_dir
        from analog.errors import AnalogWarning
        from analog.intake import load_study
        from analog.pipeline import run_study, write_outputs
    for mod, name, label in ((analog.analogs, "run_analog", "analog"), (analog.trajectory, "run_trajectory", "trajectory"),
                             (analog.combine, "combine_evidence", "combine"), (analog.regions, "assess_regions", "regions")):
        _clock(mod, name, f"  stage: {label}")
    _clock(analog.briefing, "build_briefing", "  briefing (region insets included)")
    _clock(output.OutputFolder, "write_table", "  tables", accumulate=True)
    _clock(output.OutputFolder, "write_layer", "  tables", accumulate=True)
    warnings.simplefilter("ignore", AnalogWarning)
    with timed("intake"):
        study = load_study(resource_dir("demo"))
    with timed("stages"):
        run = run_study(study)
    out = Path(args.out or tempfile.mkdtemp(prefix="analog-bench-")) / "demo"
    kw = {}
    if args.workers is not None and "figure_workers" in inspect.signature(write_outputs).parameters:
        kw["figure_workers"] = args.workers
    n_before = len(ROWS)
    with timed("writer (tables, figures, briefing, manifest)"):
        write_outputs(run, out, **kw)
    writer = ROWS.pop()
    parts = ROWS[n_before:]
    del ROWS[n_before:]
    ROWS.append(writer)
    for label, (cpu, wall) in TOTALS.items():
        parts.append((label, cpu, wall))
    ROWS.extend(parts)
    ROWS.append(("  figures (writer minus the above)", writer[1] - sum(p[1] for p in parts),
                 writer[2] - sum(p[2] for p in parts)))
    ROWS.append(("TOTAL", _cpu() - c_start, time.perf_counter() - w_start))
    if args.detail:
        import matplotlib.pyplot as plt

        from analog.pipeline import _figures

        figs = _figures(run)
        for stem, (fig, formats) in figs.items():
            bbox = None
            if hasattr(output, "tight_bbox"):
                with timed(f"  {stem} layout"):
                    bbox = output.tight_bbox(fig)
            for fmt in formats:
                with timed(f"  {stem}.{fmt}"):
                    if bbox is None:
                        output.render_figure(fig, fmt, dpi=300)
                    else:
                        output.render_figure(fig, fmt, dpi=300, bbox=bbox)
            plt.close(fig)
    width = max(len(r[0]) for r in ROWS)
    print(f"{'step':<{width}}  {'cpu s':>8}  {'wall s':>8}")
    for label, cpu, wall in ROWS:
        print(f"{label:<{width}}  {cpu:8.2f}  {wall:8.2f}")
    try:
        print(f"load average at the end: {os.getloadavg()[0]:.2f}; package: {Path(analog.__file__).parent}",
              file=sys.stderr)
    except OSError:
        pass
    return 0


if __name__ == "__main__":
    sys.exit(main())
