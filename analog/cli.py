"""Command line: a thin shell over the Python API.

Exit codes: 0 success, 2 bad input (clear message, no traceback, nothing written),
1 unexpected internal error, 130 interrupted (earlier output left intact).
"""
from __future__ import annotations

import argparse
import signal
import sys
import time
import warnings
from pathlib import Path

from . import __version__
from .errors import AnalogError, AnalogWarning, InputError

EXIT_OK, EXIT_INTERNAL, EXIT_INPUT, EXIT_INTERRUPTED = 0, 1, 2, 130

CAUTION = ("These scores are relative vulnerability rankings from deep-time evidence. They are not forecasts and "
           "not formal threat assessments; defer to official assessment processes, local regulations and expert review.")


def _parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="analog",
        description="Rank living taxa by relative vulnerability to warming, from fossil evidence "
                    "(past warming intervals and occupancy trajectories), and map it by region.",
        epilog=CAUTION)
    p.add_argument("--version", action="version", version=f"analog {__version__}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND")

    c = sub.add_parser("check", help="validate a study folder and print an inventory",
                       description="Validate a study folder (study.toml and its tables) and print a short inventory. "
                                   "Every problem is listed, one line each; nothing is written.")
    c.add_argument("study", metavar="STUDY", help="study folder holding study.toml")

    def add_run_options(sp):
        sp.add_argument("--out", required=True, metavar="DIR",
                        help="output folder (created; an earlier analog output there is replaced whole)")
        sp.add_argument("--quiet", action="store_true", help="no progress bars; print only warnings and the final summary line")
        sp.add_argument("--no-figures", action="store_true", help="skip figures (and the briefing's images)")
        sp.add_argument("--debug", action="store_true", help="show a full traceback on an internal error")
        sp.add_argument("--engine", choices=("local", "dask"), default=None,
                        help="where the record-heavy steps run: 'local' (this process, the default) or 'dask' "
                             "(a local Dask cluster, or the one given by --scheduler); results are identical")
        sp.add_argument("--scheduler", metavar="ADDRESS", default=None,
                        help="address of a running Dask scheduler, e.g. tcp://host:8786 (implies --engine dask)")

    r = sub.add_parser("run", help="run the whole job on a study",
                       description="Run the whole job on a study folder and write tables, figures, "
                                   "the briefing and manifest.json into --out.", epilog=CAUTION)
    r.add_argument("study", metavar="STUDY", help="study folder holding study.toml")
    add_run_options(r)

    d = sub.add_parser("demo", help="run the whole job on the embedded invented demo study",
                       description="Run the whole job on the embedded demo study (invented taxa and places).",
                       epilog=CAUTION)
    add_run_options(d)
    return p


class _Progress:
    """rich progress bars, one per stage; a no-op when quiet."""

    def __init__(self, quiet: bool):
        self.quiet = quiet
        self.bar = None
        self.tasks = {}
        if not quiet:
            from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

            self.bar = Progress(TextColumn("{task.description:<28}"), BarColumn(), TextColumn("{task.completed}/{task.total}"),
                                TimeElapsedColumn(), transient=False, console=_console(stderr=True))

    def __enter__(self):
        if self.bar:
            self.bar.start()
        return self

    def __exit__(self, *exc):
        if self.bar:
            self.bar.stop()
        return False

    def factory(self, stage: str):
        if self.bar is None:
            return None

        def callback(label: str, done: int, total: int):
            key = (stage, label)
            if key not in self.tasks:
                # a new step of this stage means its earlier steps are over
                for (s, _), task in self.tasks.items():
                    if s == stage:
                        t = self.bar.tasks[task]
                        self.bar.update(task, completed=t.total or t.completed)
                        self.bar.stop_task(task)
                self.tasks[key] = self.bar.add_task(f"{stage}: {label}", total=total)
            self.bar.update(self.tasks[key], completed=done, total=total)
        return callback


def _console(stderr=False):
    from rich.console import Console

    return Console(stderr=stderr, highlight=False, soft_wrap=True)


def _cmd_check(args) -> int:
    from .intake import inventory, load_study

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", AnalogWarning)
        study = load_study(args.study)
    print(inventory(study))  # includes the warnings
    return EXIT_OK


def _print_warnings(caught, study=None, stage_warnings=()):
    msgs = [str(w.message) for w in caught if issubclass(w.category, AnalogWarning)]
    if study is not None:
        msgs += [m for m in study.warnings if m not in msgs]
    # stage warnings are gathered by run_study (they also go to manifest.json)
    msgs += [m for m in stage_warnings if m not in msgs]
    for m in msgs:
        print(f"warning: {m}", file=sys.stderr)


def _cmd_run(args, study_folder) -> int:
    from .intake import load_study
    from .engine import get_engine
    from .output import check_output_target
    from .pipeline import run_study, write_outputs

    t0 = time.perf_counter()
    if args.engine == "local" and args.scheduler:
        raise AnalogError("--scheduler needs --engine dask (or leave --engine out)")
    check_output_target(Path(args.out))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", AnalogWarning)
        study = load_study(study_folder)
        with _Progress(args.quiet) as prog, get_engine(args.engine or ("dask" if args.scheduler else "local"),
                                                       scheduler=args.scheduler) as engine:
            run = run_study(study, progress=prog.factory, engine=engine)
            target, written = write_outputs(run, args.out, figures=not args.no_figures, progress=prog.factory)
    elapsed = time.perf_counter() - t0
    _print_warnings(caught, study, run.warnings)  # warnings go to stderr even with --quiet
    if not args.quiet:
        for stage in run.stages_done:
            print(f"ran   {stage:<11} {run.timings.get(stage, 0):6.1f} s")
        for stage, why in run.skipped.items():
            print(f"skip  {stage:<11} {why}")
        tables = [w for w in written if w.endswith(".csv")]
        figs = [w for w in written if w.startswith("figures/") and w.endswith(".png")]
        pages = sum(w.startswith("regions/") and w.endswith(".html") for w in written)
        briefing = f"briefing.html (+{pages} region pages), " if "briefing.html" in written else ""
        print(f"wrote {len(tables)} tables, {len(figs)} figures (PNG, with SVG/PDF copies), {briefing}manifest.json")
    print(f"Done in {elapsed:.1f} s. Output: {target}")
    if "briefing.html" in written and not args.quiet:
        print(f"Open {target / 'briefing.html'} in a browser. {CAUTION}")
    return EXIT_OK


def _on_sigterm(signum, frame):
    raise KeyboardInterrupt


def main(argv=None) -> int:
    parser = _parser()
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help()
        return EXIT_INPUT
    signal.signal(signal.SIGTERM, _on_sigterm)
    try:
        if args.command == "check":
            return _cmd_check(args)
        if args.command == "run":
            return _cmd_run(args, args.study)
        if args.command == "demo":
            from ._resources import resource_dir

            return _cmd_run(args, resource_dir("demo"))
    except InputError as exc:
        print(f"error: {exc}", file=sys.stderr)
        print("Nothing was written. Fix the problems above and run again.", file=sys.stderr)
        return EXIT_INPUT
    except AnalogError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return EXIT_INPUT
    except KeyboardInterrupt:
        print("interrupted: nothing was written; any earlier output folder is unchanged.", file=sys.stderr)
        return EXIT_INTERRUPTED
    except Exception as exc:  # noqa: BLE001 - last line of defence: no traceback for users
        if getattr(args, "debug", False):
            raise
        print(f"internal error: {type(exc).__name__}: {exc}\n"
              "This is a fault in analog, not in your data. Rerun with --debug for details "
              "and report it with the study files if you can.", file=sys.stderr)
        return EXIT_INTERNAL
    return EXIT_OK


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
