"""Time each step of the demo run: CPU seconds (this process and its children) and wall seconds.

Not collected by pytest (no ``test_`` prefix). Run with

    /work/venv/bin/python tests/benchmarks/demo_timing.py [--out DIR] [--detail]

On a shared machine CPU time (user + sys) is the steadier number; on a quiet machine with a
single busy process it approximates wall time. ``--detail`` also times every figure and format
one by one; without it the figures and the briefing are also timed on their own. Either way
the writer then runs in full, so figures are drawn twice.
"""
from __future__ import annotations

import argparse
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


@contextmanager
def timed(label: str):
    c0, w0 = _cpu(), time.perf_counter()
    yield
    ROWS.append((label, _cpu() - c0, time.perf_counter() - w0))


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--out", default=None, help="output folder (default: a temporary one)")
    ap.add_argument("--detail", action="store_true", help="also time each figure and format")
    ap.add_argument("--workers", type=int, default=None, help="figure processes (default: the writer's own)")
    args = ap.parse_args(argv)
    c_start, w_start = _cpu(), time.perf_counter()
    with timed("import"):
        from analog._resources import resource_dir
        from analog.intake import load_study
        from analog.output import render_figure, tight_bbox
        from analog.pipeline import _figures, run_study, write_outputs
    with timed("intake"):
        study = load_study(resource_dir("demo"))
    with timed("stages (all)"):
        run = run_study(study)
    for stage, wall in run.timings.items():
        ROWS.append((f"  {stage}", getattr(run, "cpu_timings", {}).get(stage, float("nan")), wall))
    if args.detail:
        import matplotlib.pyplot as plt

        with timed("figures: build all"):
            figs = _figures(run)
        for stem, (fig, formats) in figs.items():
            with timed(f"  {stem} layout"):
                bbox = tight_bbox(fig)
            for fmt in formats:
                with timed(f"  {stem}.{fmt}"):
                    render_figure(fig, fmt, dpi=300, bbox=bbox)
            plt.close(fig)
    out = args.out or tempfile.mkdtemp(prefix="analog-bench-")
    if not args.detail:
        from analog.pipeline import render_figures

        with timed("figures: draw and render all"):
            rendered = render_figures(run, workers=args.workers)
        with timed("briefing (region insets included)"):
            from analog.briefing import build_briefing

            build_briefing(run, figures=rendered)
    kw = {} if args.workers is None else {"figure_workers": args.workers}
    with timed("write_outputs (tables, figures, briefing)"):
        write_outputs(run, Path(out) / "demo", **kw)
    ROWS.append(("TOTAL", _cpu() - c_start, time.perf_counter() - w_start))
    width = max(len(r[0]) for r in ROWS)
    print(f"{'step':<{width}}  {'cpu s':>8}  {'wall s':>8}")
    for label, cpu, wall in ROWS:
        print(f"{label:<{width}}  {cpu:8.2f}  {wall:8.2f}")
    try:
        print(f"load average: {os.getloadavg()[0]:.2f}", file=sys.stderr)
    except OSError:
        pass
    return 0


if __name__ == "__main__":
    sys.exit(main())
