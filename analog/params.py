"""Frozen parameter dataclasses built from study.toml sections.

Every stage defines ``@dataclass(frozen=True) class XParams(Params)`` in its own
``params.py``. ``Params.from_section`` checks the section against the
dataclass fields (unknown keys, wrong types, choices) and reports every
problem at once as :class:`analog.errors.InputError`.

A field may declare its allowed values with
``field(default=..., metadata={"choices": (...), "min": x, "max": y, "doc": "..."})``.
"""
from __future__ import annotations

import dataclasses
import difflib
import typing
from typing import Any, Mapping

from .errors import ProblemList

__all__ = ["Params", "SECTION_MODULES"]

# study.toml section name -> module that defines ``PARAMS`` (the dataclass).
SECTION_MODULES = {
    "analog": "analog.analogs.params",
    "trajectory": "analog.trajectory.params",
    "combine": "analog.combine.params",
    "regions": "analog.regions.params",
    "figures": "analog.figures.params",
}


def _type_ok(value: Any, annotation: Any) -> bool:
    origin = typing.get_origin(annotation)
    if annotation is Any:
        return True
    if origin in (typing.Union, getattr(__import__("types"), "UnionType", None)):
        return any(_type_ok(value, a) for a in typing.get_args(annotation))
    if annotation is type(None):
        return value is None
    if annotation is float:
        return isinstance(value, (int, float)) and not isinstance(value, bool)
    if annotation is int:
        return isinstance(value, int) and not isinstance(value, bool)
    if origin in (tuple, list):
        args = [a for a in typing.get_args(annotation) if a is not Ellipsis]
        return isinstance(value, (list, tuple)) and all(
            _type_ok(v, args[0]) for v in value) if args else isinstance(value, (list, tuple))
    if origin is dict or annotation is dict:
        return isinstance(value, dict)
    if isinstance(annotation, type):
        return isinstance(value, annotation)
    return True


@dataclasses.dataclass(frozen=True)
class Params:
    """Base class: adds validated construction from a TOML section."""

    @classmethod
    def from_section(cls, section: Mapping[str, Any] | None, *, file: str = "study.toml",
                     name: str = "", problems: ProblemList | None = None):
        """Build the parameters, collecting problems into ``problems`` if given.

        Without ``problems`` any fault raises :class:`InputError` at once.
        """
        own = problems is None
        problems = ProblemList() if own else problems
        section = dict(section or {})
        hints = typing.get_type_hints(cls)
        fields = {f.name: f for f in dataclasses.fields(cls)}
        kwargs = {}
        for key, value in section.items():
            if key not in fields:
                close = difflib.get_close_matches(key, fields, n=1)
                hint = f"did you mean '{close[0]}'?" if close else f"use one of {sorted(fields)}"
                problems.add(file, f"unknown option '{key}' in [{name}]",
                             f"one of {sorted(fields)}", f"remove it or {hint}", column=f"[{name}] {key}")
                continue
            f = fields[key]
            meta = f.metadata
            ann = hints[key]
            if not _type_ok(value, ann):
                problems.add(file, f"{value!r} ({type(value).__name__})", f"a value of type {_ann_name(ann)}",
                             f"set [{name}] {key} to a {_ann_name(ann)}", column=f"[{name}] {key}")
                continue
            if "choices" in meta and value not in meta["choices"]:
                problems.add(file, repr(value), f"one of {list(meta['choices'])}",
                             f"set [{name}] {key} to one of {list(meta['choices'])}", column=f"[{name}] {key}")
                continue
            lo, hi = meta.get("min"), meta.get("max")
            if isinstance(value, (int, float)) and not isinstance(value, bool):
                if (lo is not None and value < lo) or (hi is not None and value > hi):
                    problems.add(file, repr(value), f"a number in [{lo}, {hi}]",
                                 f"set [{name}] {key} within that range", column=f"[{name}] {key}")
                    continue
            if isinstance(value, list):
                value = tuple(value)
            kwargs[key] = value
        if own:
            problems.raise_if_any()
        try:
            return cls(**kwargs)
        except (TypeError, ValueError) as exc:  # cross-field checks in __post_init__
            problems.add(file, str(exc), "consistent options", f"correct the [{name}] section", column=f"[{name}]")
            if own:
                problems.raise_if_any()
            return cls()

    def to_dict(self) -> dict:
        """Plain dict of every option after defaults were applied (for the manifest)."""
        out = {}
        for f in dataclasses.fields(self):
            v = getattr(self, f.name)
            out[f.name] = list(v) if isinstance(v, tuple) else v
        return out


def _ann_name(ann) -> str:
    if isinstance(ann, type):
        return {"float": "number", "int": "whole number", "str": "string", "bool": "true/false"}.get(
            ann.__name__, ann.__name__)
    return str(ann).replace("typing.", "")
