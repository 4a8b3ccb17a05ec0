"""``load_study``: read a study folder, check everything, return a validated :class:`~analog.study.Study`."""
from __future__ import annotations

import dataclasses
import warnings

from ..errors import AnalogWarning, InputError, Problem
from ..study import InputFile, Study
from .config import MAPS_PREFIX, read_config
from .findings import Findings
from .intervals import check_intervals, merge_intervals
from .occurrences import check_fossils, check_modern
from .readers import read_layer, read_table, sha256_of
from .regions import check_regions
from .schema import concat_converted, convert_fields, load_table_schema, repeated_text_fields
from .taxa import check_taxa

__all__ = ["load_study", "check_study"]

_STEPS = ("study.toml", "taxa", "fossil_occurrences", "modern_occurrences", "regions", "intervals", "context")


def load_study(folder, *, progress=None, chunk_bytes: int | None = None) -> Study:
    """Read and check a study folder.

    Parameters
    ----------
    folder : str or Path
        Folder holding ``study.toml`` and the input files it names.
    progress : callable, optional
        ``progress(label, done, total)`` called as each input is checked.
    chunk_bytes : int, optional
        Bytes of a CSV/TSV occurrence table parsed and checked at a time (default
        :data:`analog.intake.readers.CHUNK_BYTES`); results do not depend on it.

    Returns
    -------
    Study
        Typed, validated tables (see :mod:`analog.study` for the contract), the
        provenance of every input file (``files``: sha256 and row count), records
        left out (``dropped``) and warnings (``warnings``; each also issued as an
        :class:`~analog.errors.AnalogWarning`).

    Raises
    ------
    InputError
        Listing every problem found, one line each
        (``file:row:column: found ...; expected ...; fix: ...``).

    Notes
    -----
    The checks come from the Table Schema descriptors and the JSON Schema in
    data_schemas/, read at run time. Rows are spreadsheet rows (header = row 1);
    for layers, the feature number. Per file, column and fault at most 20 rows
    are listed, then one line counting the rest.
    """
    study, findings = _load(folder, progress, chunk_bytes)
    for message in findings.warnings:
        warnings.warn(message, AnalogWarning, stacklevel=2)
    return study


def check_study(folder, *, progress=None, chunk_bytes: int | None = None) -> tuple[list[Problem], list[str]]:
    """Problems and warnings of a study folder, without raising.

    Returns
    -------
    problems : list of Problem
        Empty if the study loads.
    warnings : list of str
    """
    try:
        _, findings = _load(folder, progress, chunk_bytes)
    except InputError as exc:
        return exc.problems, []
    return [], list(findings.warnings)


def _label(config, key: str, raw: dict) -> str:
    text = raw.get("inputs", {}).get(key)
    return text if isinstance(text, str) else str(config.inputs[key].name)


def _load(folder, progress, chunk_bytes=None):
    findings = Findings()
    total = len(_STEPS)

    def tick(i):
        if progress is not None:
            progress(f"checking {_STEPS[i]}", i + 1, total)

    config, raw = read_config(folder, findings)
    tick(0)
    files: list[InputFile] = []
    inputs = raw.get("inputs", {}) if isinstance(raw.get("inputs"), dict) else {}

    def table(key, convert=False):
        if key not in config.inputs:
            return None, None
        label = _label(config, key, raw)
        schema = load_table_schema(key)
        wanted = None if key == "taxa" else set(schema.field_names)
        typing = None
        if convert:  # large tables: typed chunk by chunk as they are read (see analog.intake.schema)
            def typing(frame, start, delimiter):
                return convert_fields(frame, schema, decimal_comma=delimiter == ";", start=start)
        tf = read_table(config.inputs[key], label=label, key=key, findings=findings, wanted=wanted,
                        categorical=repeated_text_fields(schema) if convert else (), convert=typing,
                        chunk_bytes=chunk_bytes)
        if tf is None:
            return None, label
        files.append(InputFile(key, config.inputs[key], sha256_of(config.inputs[key]), tf.rows))
        if tf.rows == 0:
            findings.add(label, "a header but no data rows", f"at least one row of {key}",
                         "fill the table, or check that the right file is named in [inputs]", row=2)
            return None, label
        return tf, label

    # taxa
    taxa, traits = None, dict(config.traits)
    tf, label = table("taxa")
    if tf is not None:
        taxa, traits = check_taxa(tf.frame, tf.columns, load_table_schema("taxa"), config.traits, label, findings,
                                  decimal_comma=tf.delimiter == ";")
    tick(1)
    fossils = modern = None
    tf, label = table("fossil_occurrences", convert=True)
    if tf is not None:
        fossils = check_fossils(concat_converted(tf.parts), tf.columns, load_table_schema("fossil_occurrences"),
                                taxa, label, findings, decimal_comma=tf.delimiter == ";")
    tick(2)
    tf, label = table("modern_occurrences", convert=True)
    if tf is not None:
        modern = check_modern(concat_converted(tf.parts), tf.columns, load_table_schema("modern_occurrences"),
                              taxa, label, findings, decimal_comma=tf.delimiter == ";")
    tick(3)
    # regions
    regions = None
    if "regions" in config.inputs:
        label = _label(config, "regions", raw)
        path = config.inputs["regions"]
        layer = inputs.get("regions_layer") if isinstance(inputs.get("regions_layer"), str) else None
        gdf = read_layer(path, label=label, key="regions", findings=findings, layer=layer)
        if gdf is not None:
            files.append(InputFile("regions", path, sha256_of(path), len(gdf)))
            if len(gdf) == 0:
                findings.add(label, "a layer without features", "at least one region polygon",
                             "check that the right file and layer are named in [inputs]")
            else:
                regions = check_regions(gdf, load_table_schema("regions"), label, findings)
    tick(4)
    # intervals: built-in catalogue, extended or replaced by the user's table
    from ..reference import load_intervals

    user = None
    tf, label = table("intervals")
    if tf is not None:
        user = check_intervals(tf.frame, tf.columns, load_table_schema("intervals"), label, findings,
                               decimal_comma=tf.delimiter == ";")
    mode = inputs.get("intervals_mode", "extend") if inputs.get("intervals_mode") in ("extend", "replace") else "extend"
    intervals = merge_intervals(load_intervals(), user, mode=mode, file=label or "intervals", findings=findings)
    tick(5)
    context = None
    if "context" in config.inputs:
        label = _label(config, "context", raw)
        path = config.inputs["context"]
        if label.startswith(MAPS_PREFIX) and not path.is_file():
            findings.add(label, f"no file '{label[len(MAPS_PREFIX):]}' in the shipped maps folder ({path.parent})",
                         "a context layer shipped with the tool", "check the name after 'maps:' in [inputs] context")
        else:
            context = read_layer(path, label=label, key="context", findings=findings, warn_layers=False)
            if context is not None:
                files.append(InputFile("context", path, sha256_of(path), len(context)))
                if context.crs is None:
                    findings.warn(f"{label}: context layer without a CRS; it is not drawn "
                                  f"(set its CRS, e.g. in QGIS or with geopandas .set_crs)")
                    context = None
    tick(6)

    findings.problems.raise_if_any()
    config = dataclasses.replace(config, traits=traits)
    study = Study(config=config, taxa=taxa, fossil_occurrences=fossils, modern_occurrences=modern,
                  regions=regions, intervals=intervals, context=context, files=files,
                  dropped=findings.dropped_frame(), warnings=list(findings.warnings))
    return study, findings
