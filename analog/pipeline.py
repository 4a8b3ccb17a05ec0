"""The whole job as a Python API: study folder -> results -> output folder.

``run_study`` runs the stages in memory (pure, nothing written);
``write_outputs`` is the only place that writes, through :class:`analog.output.OutputFolder`.
A notebook user can call the stages one by one instead; see DEVELOPERS.md.
"""
from __future__ import annotations

import datetime as _dt
import importlib
import platform
import time
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable

from . import __version__
from .errors import AnalogWarning
from .rng import stage_generators
from .study import Study

__all__ = ["RunResult", "run_study", "write_outputs", "STAGE_ORDER"]

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
        t0 = time.perf_counter()
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always", AnalogWarning)
            result = fn()
        for w in caught:
            if issubclass(w.category, AnalogWarning):
                run.warnings.append(f"{stage}: {w.message}")
            else:
                warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
        run.timings[stage] = time.perf_counter() - t0
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


def _figures(run: RunResult) -> dict[str, tuple[Any, tuple[str, ...]]]:
    """stem -> (Figure, formats). Maps also get PDF."""
    figs: dict[str, tuple[Any, tuple[str, ...]]] = {}
    fig_params = run.study.config.params("figures") if "figures" in run.study.config.sections else None
    base = tuple(getattr(fig_params, "formats", ("png", "svg")))
    if run.analog is not None:
        forest = _optional("analog.figures.forest", "forest_plots")
        if forest is not None:
            for k, f in forest(run.analog, run.study.traits).items():
                figs[k] = (f, base)
    if run.trajectory is not None:
        for name in ("trajectory_panels", "null_comparison"):
            fn = _optional("analog.figures.trajectories", name)
            if fn is None:
                continue
            out = fn(run.trajectory, run.study) if name == "trajectory_panels" else fn(run.trajectory)
            for k, f in out.items():
                figs[k] = (f, base)
    if run.combined is not None:
        ranking = importlib.import_module("analog.figures.ranking") if _optional(
            "analog.figures.ranking", "rank_scatter") else None
        if ranking is not None:
            for k, f in ranking.ranking_figures(run).items():
                figs[k] = (f, base)
    if run.regions is not None:
        maps = importlib.import_module("analog.figures.maps") if _optional(
            "analog.figures.maps", "risk_map") else None
        if maps is not None:
            for k, f in maps.map_figures(run).items():
                figs[k] = (f, tuple(dict.fromkeys(base + ("pdf",))))
    return figs


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
                  progress: ProgressFactory | None = None) -> tuple[Path, list[str]]:
    """Write every table, figure, the briefing and manifest.json into ``out`` atomically."""
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
            figs = _figures(run)
            cb = progress("figures") if progress else None
            for i, (stem, (fig, formats)) in enumerate(figs.items()):
                rendered[stem] = folder.write_figure(stem, fig, formats=formats, dpi=dpi)
                if cb:
                    cb("figures", i + 1, len(figs))
        if briefing:
            build = _optional("analog.briefing", "build_briefing")
            if build is not None:
                for rel, html in build(run, figures=rendered).items():
                    folder.write_text(rel, html)
        written = sorted(folder.written) + ["manifest.json"]
        folder.write_json("manifest.json", build_manifest(run, written))
        target = folder.commit()
    return target, written
