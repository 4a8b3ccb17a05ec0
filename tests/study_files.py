"""Writing invented test studies to folders: a minimal TOML writer and a shared ``write()``.

The tiny studies of tests/intake and tests/corpus keep their own tables and config; both
write them the same way, through :class:`StudyFiles`.
"""
from __future__ import annotations

from pathlib import Path


def _toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, (int, float)):
        return repr(v)
    if isinstance(v, str):
        return '"' + v.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    raise TypeError(type(v))


def to_toml(config: dict) -> str:
    """Minimal TOML writer for nested dicts of scalars and lists."""
    lines = []

    def table(prefix, d):
        scalars = {k: v for k, v in d.items() if not isinstance(v, dict)}
        subs = {k: v for k, v in d.items() if isinstance(v, dict)}
        if prefix and (scalars or not subs):
            lines.append(f"[{prefix}]")
        for k, v in scalars.items():
            lines.append(f"{k} = {_toml_value(v)}")
        for k, v in subs.items():
            table(f"{prefix}.{k}" if prefix else k, v)

    table("", config)
    return "\n".join(lines) + "\n"


class StudyFiles:
    """A study's tables (``taxa``, ``fossils``, ``modern``, ``regions``) and ``config``.

    ``write()`` puts them in ``folder`` under the names in ``config['inputs']``: ``.parquet``
    as Parquet, ``.tsv`` tab-separated, anything else with ``sep`` and ``encoding``; the
    region layer as GeoParquet or through pyogrio; then ``study.toml``. A table set to None,
    or without an input name, is not written.
    """

    _TABLES = (("taxa", "taxa"), ("fossil_occurrences", "fossils"), ("modern_occurrences", "modern"))

    folder: Path
    config: dict
    sep = ","
    encoding = "utf-8"

    def write(self) -> Path:
        self.folder.mkdir(parents=True, exist_ok=True)
        inputs = self.config.get("inputs", {})
        for key, attr in self._TABLES:
            df = getattr(self, attr)
            name = inputs.get(key)
            if name is None or df is None:
                continue
            path = self.folder / name
            if path.suffix == ".parquet":
                df.to_parquet(path, index=False)
            else:
                sep = "\t" if path.suffix == ".tsv" else self.sep
                df.to_csv(path, index=False, sep=sep, encoding=self.encoding, lineterminator="\n")
        if self.regions is not None and "regions" in inputs:
            path = self.folder / inputs["regions"]
            if path.suffix == ".parquet":
                self.regions.to_parquet(path)
            else:
                self.regions.to_file(path, engine="pyogrio")
        (self.folder / "study.toml").write_text(to_toml(self.config), encoding="utf-8")
        return self.folder

    def path(self, key: str) -> Path:
        return self.folder / self.config["inputs"][key]
