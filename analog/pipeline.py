"""The whole job as a Python API: study folder -> results -> output folder.

``run_study`` runs the stages in memory (pure, nothing written);
``write_outputs`` is the only place that writes, through :class:`analog.output.OutputFolder`.
A notebook user can call the stages one by one instead; see DEVELOPERS.md.
"""
from __future__ import annotations

import datetime as _dt
import functools
import importlib
import os
import platform
import sys
import time
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable

from . import __version__
from .errors import AnalogWarning
from .rng import stage_generators
from .study import Study

__all__ = ["RunResult", "run_study", "write_outputs", "render_figures", "STAGE_ORDER"]

STAGE_ORDER = ("analog", "trajectory", "combine", "regions")

ProgressFactory = Callable[[str], Callable[[str, int, int], None] | None]


@dataclass
class RunResult:
    """Everything one run produced, in memory."""

    study: Study
    analog: Any = None
    trajectory: Any = None
    combined: Any = None
    regions: Any = None
    stages_done: list[str] = field(default_factory=list)
    skipped: dict[str, str] = field(default_factory=dict)  # stage -> why it did not run
    warnings: list[str] = field(default_factory=list)
    timings: dict[str, float] = field(default_factory=dict)
    cpu_timings: dict[str, float] = field(default_factory=dict)  # stage -> CPU seconds of this process
    started_at: str = ""

    def tables(self) -> dict[str, Any]:
        """All output tables keyed by file name, in stage order."""
        out = {}
        for name in ("analog", "trajectory", "combined", "regions"):
            result = getattr(self, name)
            if result is not None:
                out.update(result.tables())
        return out

    def summary(self) -> str:
        lines = [self.study.summary(), ""]
        for name in ("analog", "trajectory", "combined", "regions"):
            result = getattr(self, name)
            if result is not None:
                lines.append(result.summary())
        for stage, why in self.skipped.items():
            lines.append(f"Not run: {stage} ({why})")
        return "\n".join(lines)


def _optional(module: str, name: str):
    """Import a stage entry point; None when that stage is not part of this build."""
    try:
        mod = importlib.import_module(module)
    except ModuleNotFoundError as exc:
        if exc.name and exc.name.startswith(module.rsplit(".", 1)[0]):
            return None
        raise
    return getattr(mod, name, None)


def run_study(study: Study, *, progress: ProgressFactory | None = None,
              stages: tuple[str, ...] = STAGE_ORDER, engine=None) -> RunResult:
    """Run the evidence stages on a validated study.

    Parameters
    ----------
    study : Study
        From :func:`analog.intake.load_study`.
    progress : callable, optional
        ``progress(stage) -> callback | None``; the callback is passed to the stage as
        ``progress(label, done, total)``.
    stages : tuple of str
        Subset of ``('analog', 'trajectory', 'combine', 'regions')``.
    engine : {'local', 'dask'} or analog.engine.Engine, optional
        Where the record-scaling work of the trajectory and regions stages runs (default:
        in this process). A name starts an engine for this run and closes it at the end;
        an :class:`~analog.engine.Engine` passed in is left open. Results are identical.

    Returns
    -------
    RunResult
    """
    from .engine import engine_scope

    with engine_scope(engine) as eng:
        return _run_stages(study, progress=progress, stages=stages, engine=eng)


def _run_stages(study: Study, *, progress, stages, engine) -> RunResult:
    run = RunResult(study=study, started_at=_dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"))
    rngs = stage_generators(study.config.seed)
    cfg = study.config

    def cb(stage):
        return progress(stage) if progress is not None else None

    def timed(stage, fn):
        t0, c0 = time.perf_counter(), time.process_time()
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always", AnalogWarning)
            result = fn()
        for w in caught:
            if issubclass(w.category, AnalogWarning):
                text = str(w.message)
                run.warnings.append(text if text.startswith(f"{stage}: ") else f"{stage}: {text}")
            else:
                warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
        run.timings[stage] = time.perf_counter() - t0
        run.cpu_timings[stage] = time.process_time() - c0
        run.stages_done.append(stage)
        return result

    if "analog" in stages:
        fn = _optional("analog.analogs", "run_analog")
        if fn is None:
            run.skipped["analog"] = "analog-evidence stage not available in this build"
        else:
            run.analog = timed("analog", lambda: fn(study, cfg.params("analog"), rng=rngs["analog"],
                                                    progress=cb("analog")))
    if "trajectory" in stages:
        fn = _optional("analog.trajectory", "run_trajectory")
        if fn is None:
            run.skipped["trajectory"] = "trajectory stage not available in this build"
        else:
            run.trajectory = timed("trajectory", lambda: fn(study, cfg.params("trajectory"),
                                                            rng=rngs["trajectory"], progress=cb("trajectory"),
                                                            engine=engine))
    if "combine" in stages:
        fn = _optional("analog.combine", "combine_evidence")
        if fn is None:
            run.skipped["combine"] = "combine stage not available in this build"
        elif run.analog is None and run.trajectory is None:
            run.skipped["combine"] = "needs at least one line of evidence"
        else:
            run.combined = timed("combine", lambda: fn(study, run.analog, run.trajectory,
                                                       cfg.params("combine"), rng=rngs["combine"]))
    if "regions" in stages:
        fn = _optional("analog.regions", "assess_regions")
        if fn is None:
            run.skipped["regions"] = "regions stage not available in this build"
        elif run.combined is None:
            run.skipped["regions"] = "needs the combined ranking"
        else:
            run.regions = timed("regions", lambda: fn(study, run.combined, cfg.params("regions"),
                                                      rng=rngs["regions"], engine=engine))
    return run


def _figure_jobs(run: RunResult) -> list[tuple[str, Callable[[], dict[str, Any]], tuple[str, ...]]]:
    """One ``(stem, draw, formats)`` per figure, in output order; ``draw()`` returns ``{stem: Figure}``
    (empty when that figure has nothing to show). Maps also get PDF."""
    jobs: list[tuple[str, Callable[[], dict[str, Any]], tuple[str, ...]]] = []
    fig_params = run.study.config.params("figures") if "figures" in run.study.config.sections else None
    base = tuple(getattr(fig_params, "formats", ("png", "svg")))

    def add(stems, fn, formats, *args):
        for stem in stems:
            jobs.append((stem, functools.partial(fn, *args, only=(stem,)), formats))

    if run.analog is not None:
        forest = _optional("analog.figures.forest", "forest_plots")
        if forest is not None:
            add([f"forest_{t}" for t in run.study.traits], forest, base, run.analog, run.study.traits)
    if run.trajectory is not None:
        panels = _optional("analog.figures.trajectories", "trajectory_panels")
        if panels is not None:
            add(["trajectories_extant", "trajectories_extinct"], panels, base, run.trajectory, run.study)
        null = _optional("analog.figures.trajectories", "null_comparison")
        if null is not None:
            jobs.append(("noise_null", functools.partial(null, run.trajectory), base))
    if run.combined is not None:
        ranking = _optional("analog.figures.ranking", "ranking_figures")
        if ranking is not None:
            add(["rank_scatter", "top_taxa"], ranking, base, run)
    if run.regions is not None:
        maps = _optional("analog.figures.maps", "map_figures")
        if maps is not None:
            add(["risk_map", "risk_map_by_line", "risk_difference_map"], maps, tuple(dict.fromkeys(base + ("pdf",))),
                run)
    return jobs


def _figures(run: RunResult) -> dict[str, tuple[Any, tuple[str, ...]]]:
    """stem -> (Figure, formats), every figure drawn here. Maps also get PDF."""
    return {k: (f, formats) for _, draw, formats in _figure_jobs(run) for k, f in draw().items()}


# rough relative drawing time of each kind of figure (by the first word of its stem)
_FIGURE_COST = {"trajectories": 4, "risk": 2, "forest": 2}


def _draw_and_render(draw, formats, dpi) -> dict[str, dict[str, bytes]]:
    """Draw one job's figures and render each format; stem -> format -> bytes."""
    import matplotlib.pyplot as plt

    from .output import render_figure, tight_bbox

    out = {}
    for stem, fig in draw().items():
        bbox = tight_bbox(fig) if len(formats) > 1 else None  # one layout pass for all formats
        out[stem] = {fmt: render_figure(fig, fmt, dpi=dpi, bbox=bbox) for fmt in formats}
        plt.close(fig)
    return out


def _claim(counter) -> int:
    with counter.get_lock():
        k = counter.value
        counter.value += 1
    return k


def _figure_worker(jobs, order, dpi, counter, conn) -> None:
    """Second process: claim jobs until none are left, then send everything drawn.

    Ctrl-C and SIGTERM end it silently (the parent handles the interruption and stops it);
    any error leaves the rest of the figures to the parent, which reports errors itself.
    """
    import signal

    signal.signal(signal.SIGINT, signal.SIG_DFL)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)
    done = {}
    try:
        while (k := _claim(counter)) < len(order):
            i = order[k]
            done[i] = _draw_and_render(jobs[i][1], jobs[i][2], dpi)
    except Exception:  # noqa: BLE001 - the parent draws whatever is missing
        pass
    try:
        conn.send(done)
    except Exception:  # noqa: BLE001 - the parent has gone or stopped listening
        pass
    finally:
        conn.close()


def _fork_context():
    """A fork-based multiprocessing context on Linux, else None (figures are then drawn in this process).

    Fork lets the second process inherit the run and the figure functions without pickling
    them; it is used only on Linux, where it is the long-standing default.
    """
    import multiprocessing

    if not sys.platform.startswith("linux") or "fork" not in multiprocessing.get_all_start_methods():
        return None
    if multiprocessing.current_process().daemon:
        return None  # daemonic processes may not have children
    return multiprocessing.get_context("fork")


def _default_workers() -> int:
    try:
        cpus = len(os.sched_getaffinity(0))
    except AttributeError:  # not on every platform
        cpus = os.cpu_count() or 1
    return min(2, cpus)


def render_figures(run: RunResult, *, dpi: int = 300, workers: int | None = None,
                   progress: Callable[[str, int, int], None] | None = None) -> dict[str, dict[str, bytes]]:
    """Draw and render every figure of a run: stem -> format -> bytes, in output order.

    With ``workers=2`` (the default where two CPUs are available, on Linux) a second,
    forked process takes figures from the same queue, longest first; the bytes are the same
    as when one process draws everything. Anything the second process did not deliver is
    drawn here.
    """
    jobs = _figure_jobs(run)
    # longest first (small multiples, then maps and forest plots, then single charts), so the two
    # processes finish close together
    order = sorted(range(len(jobs)), key=lambda i: -_FIGURE_COST.get(jobs[i][0].split("_")[0], 1))
    results: dict[int, dict[str, dict[str, bytes]]] = {}
    n_done = 0

    def step(i):
        nonlocal n_done
        results[i] = _draw_and_render(jobs[i][1], jobs[i][2], dpi)
        n_done += 1
        if progress is not None:
            progress("figures", n_done, len(jobs))

    workers = _default_workers() if workers is None else int(workers)
    ctx = _fork_context() if workers > 1 and len(jobs) > 1 else None
    if ctx is None:
        for i in order:
            step(i)
    else:
        counter = ctx.Value("i", 0)
        receive, send = ctx.Pipe(duplex=False)
        for stream in (sys.stdout, sys.stderr):  # so the child cannot write the parent's pending output again
            if stream is not None:
                stream.flush()
        proc = ctx.Process(target=_figure_worker, args=(jobs, order, dpi, counter, send), daemon=True)
        proc.start()
        send.close()
        try:
            while (k := _claim(counter)) < len(order):
                step(order[k])
            try:
                theirs = receive.recv()
            except EOFError:  # the second process died: its figures are drawn below
                theirs = {}
            proc.join()
        finally:
            receive.close()
            if proc.is_alive():
                proc.terminate()
                proc.join()
        for i, value in theirs.items():
            results[i] = value
            n_done += 1
            if progress is not None:
                progress("figures", n_done, len(jobs))
        for i in order:
            if i not in results:
                step(i)
    rendered: dict[str, dict[str, bytes]] = {}
    for i in range(len(jobs)):
        rendered.update(results[i])
    return rendered


def library_versions() -> dict[str, str]:
    out = {"python": platform.python_version()}
    for name in ("numpy", "pandas", "scipy", "geopandas", "shapely", "pyproj", "pyogrio", "pyarrow",
                 "matplotlib", "networkx", "jinja2", "mapclassify"):
        try:
            out[name] = importlib.import_module(name).__version__
        except Exception:  # a missing optional library is reported, not fatal
            out[name] = "not installed"
    try:
        import pyogrio
        out["gdal"] = pyogrio.__gdal_version_string__
    except Exception:
        pass
    return out


def build_manifest(run: RunResult, written: list[str]) -> dict:
    """Provenance record. Everything but the ``run_time`` block is identical on a rerun."""
    cfg = run.study.config
    return {
        "tool": "analog",
        "version": __version__,
        "study": cfg.name,
        "seed": cfg.seed,
        "inputs": [{"role": f.role, "path": str(f.path.name if f.path.is_absolute() else f.path),
                    "sha256": f.sha256, "rows": f.rows} for f in run.study.files],
        "parameters": {
            "scenario": {"warming_c": cfg.warming_c},
            "traits": {k: {"kind": s.kind, "levels": list(s.levels) if s.levels else None,
                           "reference": s.reference} for k, s in cfg.traits.items()},
            **{name: p.to_dict() for name, p in sorted(cfg.sections.items())},
        },
        "stages_run": list(run.stages_done),
        "stages_skipped": dict(run.skipped),
        "dropped_records": run.study.dropped.to_dict(orient="records"),
        "warnings": list(run.study.warnings) + list(run.warnings),
        "libraries": library_versions(),
        "files": sorted(written),
        "run_time": {"started_at": run.started_at,
                     "seconds": {k: round(v, 2) for k, v in run.timings.items()}},
    }


def write_outputs(run: RunResult, out: str | Path, *, figures: bool = True, briefing: bool = True,
                  progress: ProgressFactory | None = None,
                  figure_workers: int | None = None) -> tuple[Path, list[str]]:
    """Write every table, figure, the briefing and manifest.json into ``out`` atomically.

    ``figure_workers`` processes draw the figures (default: 2 where two CPUs are available,
    on Linux; 1 = all in this process); the files are the same either way.
    """
    from .output import OutputFolder

    with OutputFolder(out) as folder:
        for name, frame in run.tables().items():
            folder.write_table(name, frame)
        if run.regions is not None and getattr(run.regions, "layer", None) is not None:
            folder.write_layer("regions.gpkg", run.regions.layer, layer="regions")
        fig_params = run.study.config.sections.get("figures")
        dpi = int(getattr(fig_params, "dpi", 300))
        rendered: dict[str, dict[str, bytes]] = {}
        if figures:
            rendered = render_figures(run, dpi=dpi, workers=figure_workers,
                                      progress=progress("figures") if progress else None)
            for stem, formats in rendered.items():
                for fmt, data in formats.items():
                    folder.write_bytes(f"figures/{stem}.{fmt}", data)
        if briefing:
            build = _optional("analog.briefing", "build_briefing")
            if build is not None:
                for rel, html in build(run, figures=rendered).items():
                    folder.write_text(rel, html)
        written = sorted(folder.written) + ["manifest.json"]
        folder.write_json("manifest.json", build_manifest(run, written))
        target = folder.commit()
    return target, written
