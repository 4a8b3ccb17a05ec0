"""Read study.toml: check it against data_schemas/study.schema.json, build traits and stage options."""
from __future__ import annotations

import datetime as _dt
import importlib
import json
import re
import tomllib
from pathlib import Path

from .._resources import resource_dir
from ..errors import InputError
from ..params import SECTION_MODULES
from ..study import StudyConfig, TraitSpec
from .findings import Findings, show
from .schema import close_names, load_table_schema

__all__ = ["read_config", "study_schema", "MAPS_PREFIX"]

MAPS_PREFIX = "maps:"
STUDY_FILE = "study.toml"
TABLE_KEYS = ("taxa", "fossil_occurrences", "modern_occurrences", "intervals")
LAYER_KEYS = ("regions", "context")


def study_schema() -> dict:
    """The JSON Schema of study.toml (draft 2020-12), as shipped in data_schemas/."""
    return json.loads((resource_dir("schemas") / "study.schema.json").read_text(encoding="utf-8"))


def _plain(value):
    # TOML dates/times become ISO text so the JSON Schema can check them.
    if isinstance(value, dict):
        return {k: _plain(v) for k, v in value.items()}
    if isinstance(value, list):
        return [_plain(v) for v in value]
    if isinstance(value, (_dt.date, _dt.datetime, _dt.time)):
        return value.isoformat()
    return value


def _where(path) -> str:
    parts = [str(p) for p in path]
    if not parts:
        return "(top level)"
    if len(parts) == 1:
        return f"[{parts[0]}]"
    if parts[0] == "traits":
        return (f"[traits.{parts[1]}] " + ".".join(parts[2:])).strip()
    return f"[{parts[0]}] " + ".".join(parts[1:])


def _schema_problems(raw: dict, schema: dict, findings: Findings):
    import jsonschema

    validator = jsonschema.Draft202012Validator(schema, format_checker=jsonschema.FormatChecker())
    for err in sorted(validator.iter_errors(raw), key=lambda e: [str(p) for p in e.absolute_path]):
        path = list(err.absolute_path)
        where = _where(path)
        kind = err.validator
        if kind == "additionalProperties":
            allowed = list(err.schema.get("properties", {}))
            for key in sorted(set(err.instance) - set(allowed)):
                close = close_names(key, allowed)
                if not path:
                    found, column = f"an unknown section [{key}]", f"[{key}]"
                    expected = f"the sections {allowed}"
                else:
                    found, column = f"an unknown option '{key}'", f"{where} {key}".strip()
                    expected = f"options {allowed}"
                fix = f"rename it to '{close[0]}'" if close else "remove it"
                findings.add(STUDY_FILE, found, expected, fix, column=column)
        elif kind == "required":
            for key in err.validator_value:
                if key not in err.instance:
                    sub = err.schema.get("properties", {}).get(key, {})
                    what = f"section [{key}]" if not path else f"option '{key}'"
                    desc = sub.get("description", "")
                    findings.add(STUDY_FILE, f"no {what}", f"the {what}" + (f" ({desc})" if desc else ""),
                                 f"add {what} under {where}" if path else f"add {what} to study.toml",
                                 column=f"{where} {key}" if path else f"[{key}]")
        elif kind == "not" and not isinstance(err.instance, dict):
            continue  # a sub-table written as a plain value: its type error says so
        elif kind == "not" and "required" in err.validator_value:
            key = err.validator_value["required"][0]
            trait_kind = err.instance.get("kind")
            findings.add(STUDY_FILE, f"option '{key}' for a {trait_kind} trait",
                         f"'{key}' only for the kinds that use it", f"remove '{key}' from {where}",
                         column=f"{where} {key}")
        elif kind == "type" and err.validator_value == "object":
            header = where.split(" ")[0] if path else where
            findings.add(STUDY_FILE, f"{show(err.instance)} ({type(err.instance).__name__})",
                         "a table of options", f"write it as a section: a line {header} followed by "
                         f"key = value lines (see data_schemas/README.md)", column=where)
        elif kind == "type":
            findings.add(STUDY_FILE, f"{show(err.instance)} ({type(err.instance).__name__})",
                         f"a value of type {err.validator_value}", f"write {where} as a {err.validator_value}",
                         column=where)
        elif kind in ("enum", "const"):
            allowed = err.validator_value if kind == "enum" else [err.validator_value]
            close = close_names(str(err.instance), [str(a) for a in allowed])
            findings.add(STUDY_FILE, show(err.instance), f"one of {allowed}",
                         f"did you mean '{close[0]}'?" if close else f"use one of {allowed}", column=where)
        elif kind in _BOUND_WORDS:
            findings.add(STUDY_FILE, repr(err.instance), f"a number {_bounds(err.schema)}",
                         f"set {where} within that range", column=where)
        elif kind == "minLength":
            findings.add(STUDY_FILE, "an empty text" if err.instance == "" else show(err.instance),
                         f"a text of at least {err.validator_value} character(s)", f"fill in {where}", column=where)
        elif kind == "minItems":
            findings.add(STUDY_FILE, f"a list of {len(err.instance)} item(s)",
                         f"a list of at least {err.validator_value} items", f"add items to {where}", column=where)
        elif kind == "uniqueItems":
            seen, twice = set(), []
            for item in err.instance:
                (twice.append(item) if item in seen else seen.add(item))
            findings.add(STUDY_FILE, f"{', '.join(show(x) for x in twice)} listed twice", "each item once",
                         f"remove the repeated items from {where}", column=where)
        elif kind == "format":
            findings.add(STUDY_FILE, show(err.instance), f"a {err.validator_value} (YYYY-MM-DD)",
                         f"write {where} as an ISO date, e.g. 2026-11-01", column=where)
        else:
            findings.add(STUDY_FILE, show(err.instance), err.message, f"correct {where}", column=where)


_BOUND_WORDS = {"minimum": "at least", "exclusiveMinimum": "greater than", "maximum": "at most",
                "exclusiveMaximum": "less than"}


def _bounds(schema: dict) -> str:
    return " and ".join(f"{words} {schema[key]:g}" for key, words in _BOUND_WORDS.items() if key in schema)


def _resolve(folder: Path, text: str) -> Path:
    if text.startswith(MAPS_PREFIX):
        return resource_dir("maps") / text[len(MAPS_PREFIX):]
    return (folder / text)


def read_config(folder, findings: Findings) -> tuple[StudyConfig, dict]:
    """Parse and check study.toml.

    Faults that stop everything else (no study.toml, not TOML, no [inputs])
    raise :class:`InputError` at once; every other fault is collected.

    Returns
    -------
    config : StudyConfig
        With traits and stage options; ``inputs`` maps each [inputs] file key to a path.
    raw : dict
        The parsed TOML (for options such as ``intervals_mode`` and ``regions_layer``).
    """
    folder = Path(folder)
    path = folder / STUDY_FILE
    if not folder.is_dir():
        findings.add(str(folder), "no such folder", "a study folder holding study.toml",
                     "check the path of the study folder")
        findings.problems.raise_if_any()
    if not path.is_file():
        findings.add(STUDY_FILE, f"no study.toml in {folder}", "a study.toml file",
                     "create study.toml (see data_schemas/README.md or examples/demo/study.toml)")
        findings.problems.raise_if_any()
    try:
        raw = tomllib.loads(path.read_text(encoding="utf-8-sig"))
    except UnicodeDecodeError as exc:
        findings.add(STUDY_FILE, f"bytes that are not UTF-8 ({exc})", "UTF-8 text", "save study.toml as UTF-8")
        raise InputError(list(findings.problems)) from None
    except tomllib.TOMLDecodeError as exc:
        line = re.search(r"at line (\d+)", str(exc))
        findings.add(STUDY_FILE, f"a TOML syntax error: {exc}", "valid TOML",
                     "fix the line named (text values need double quotes; one [section] header each)",
                     row=int(line.group(1)) if line else None)
        raise InputError(list(findings.problems)) from None
    raw = _plain(raw)
    _schema_problems(raw, study_schema(), findings)

    study = raw.get("study", {}) if isinstance(raw.get("study"), dict) else {}
    inputs_raw = raw.get("inputs", {}) if isinstance(raw.get("inputs"), dict) else {}
    inputs = {k: _resolve(folder, v) for k, v in inputs_raw.items()
              if k in TABLE_KEYS + LAYER_KEYS and isinstance(v, str) and v}
    traits = _traits(raw.get("traits", {}), findings)
    sections = _sections(raw, findings)
    scenario = raw.get("scenario", {}) if isinstance(raw.get("scenario"), dict) else {}
    warming = scenario.get("warming_c", 4.0)
    config = StudyConfig(
        name=str(study.get("name", "")),
        seed=study.get("seed", 0) if isinstance(study.get("seed"), int) else 0,
        folder=folder.resolve(),
        warming_c=float(warming) if isinstance(warming, (int, float)) and not isinstance(warming, bool) else 4.0,
        data_date=study.get("data_date") if isinstance(study.get("data_date"), str) else None,
        description=str(study.get("description", "")),
        traits=traits,
        inputs=inputs,
        sections=sections,
    )
    return config, raw


def _traits(section, findings: Findings) -> dict[str, TraitSpec]:
    if not isinstance(section, dict):
        return {}
    fixed = set(load_table_schema("taxa").field_names)
    out = {}
    for name, spec in section.items():
        if not isinstance(spec, dict) or spec.get("kind") not in ("categorical", "ordinal", "numeric", "binary"):
            continue  # already reported by the JSON Schema check
        where = f"[traits.{name}]"
        if name in fixed:
            findings.add(STUDY_FILE, f"a trait named '{name}'", "trait names other than the fixed taxa columns",
                         f"rename the trait column (for example '{name}_trait') in the taxa table and study.toml",
                         column=where)
            continue
        levels = spec.get("levels")
        # repeated levels are reported by the JSON Schema check; keep the first of each
        levels = tuple(dict.fromkeys(str(v).strip() for v in levels)) if isinstance(levels, list) and levels else None
        reference = spec.get("reference")
        if isinstance(reference, str) and levels is not None and reference.strip() not in levels:
            findings.add(STUDY_FILE, f"reference {show(reference)}", f"one of the levels {list(levels)}",
                         f"set {where} reference to one of the levels", column=f"{where} reference")
            reference = None
        out[name] = TraitSpec(name=name, kind=spec["kind"], levels=levels,
                              reference=reference.strip() if isinstance(reference, str) else None,
                              label=spec.get("label") if isinstance(spec.get("label"), str) else None)
    return out


def _sections(raw: dict, findings: Findings) -> dict:
    """Stage options: ``PARAMS.from_section`` of each stage module that exists."""
    sections = {}
    for section, module_name in SECTION_MODULES.items():
        try:
            module = importlib.import_module(module_name)
        except ModuleNotFoundError as exc:
            # The stage is not part of this build yet; a fault inside an existing module still raises.
            if exc.name and (module_name == exc.name or module_name.startswith(exc.name + ".")):
                continue
            raise
        params_cls = getattr(module, "PARAMS", None)
        if params_cls is None:
            continue
        value = raw.get(section)
        if value is not None and not isinstance(value, dict):
            continue  # reported by the JSON Schema check
        sections[section] = params_cls.from_section(value, file=STUDY_FILE, name=section,
                                                    problems=findings.problems)
    return sections
