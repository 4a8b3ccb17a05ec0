"""Read input tables and layers from disk. The only module of intake that touches files.

Tables: CSV/TSV/TXT (UTF-8 with or without byte-order mark; the separator —
comma, tab or semicolon — is taken from the header line) and Parquet.
Layers: GeoPackage, GeoJSON, Shapefile (read with pyogrio) and GeoParquet.
Every failure becomes a problem in :class:`~analog.intake.findings.Findings`;
readers return ``None`` instead of raising.
"""
from __future__ import annotations

import codecs
import csv
import hashlib
import io
import re
from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd

from .findings import Findings, show

__all__ = ["TableFile", "read_table", "read_layer", "sha256_of", "TEXT_SUFFIXES", "PARQUET_SUFFIXES"]

TEXT_SUFFIXES = {".csv", ".tsv", ".tab", ".txt"}
PARQUET_SUFFIXES = {".parquet", ".pq", ".geoparquet"}
LAYER_SUFFIXES = {".gpkg", ".geojson", ".json", ".shp", ".fgb"} | PARQUET_SUFFIXES
_DELIMITERS = {",": "comma", "\t": "tab", ";": "semicolon"}
_MAX_BAD_BYTES = 20


@dataclass
class TableFile:
    """What was read: the table and how the file looked."""

    frame: pd.DataFrame
    columns: list[str]            # every column in the file, in order (names trimmed)
    delimiter: str | None = None  # text files only
    had_bom: bool = False
    notes: list[str] = field(default_factory=list)


def sha256_of(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def _exists(path: Path, label: str, key: str, findings: Findings) -> bool:
    if path.is_file():
        return True
    where = "a folder, not a file" if path.is_dir() else "no such file"
    findings.add(label, where, f"the {key} file at {path}",
                 f"check the path of '{key}' under [inputs] in study.toml (paths are relative to the study folder)")
    return False


def read_table(path: Path, *, label: str, key: str, findings: Findings, wanted=None) -> TableFile | None:
    """Read a CSV/TSV/Parquet table as text columns (Parquet keeps its types).

    Parameters
    ----------
    path : Path
        The file.
    label : str
        File name used in messages.
    key : str
        The [inputs] key naming this file (for messages).
    wanted : collection of str, optional
        Only these columns are read (others are listed in ``columns`` but skipped);
        default reads all.
    """
    if not _exists(path, label, key, findings):
        return None
    suffix = path.suffix.lower()
    if suffix in PARQUET_SUFFIXES:
        return _read_parquet(path, label, findings, wanted)
    if suffix in {".xlsx", ".xls", ".ods"}:
        findings.add(label, "a spreadsheet workbook", "a CSV, TSV or Parquet file",
                     "save the sheet as 'CSV UTF-8' (or tab-separated text) and point study.toml at it")
        return None
    if suffix not in TEXT_SUFFIXES:
        findings.add(label, f"a file ending in '{path.suffix}'", "a .csv, .tsv, .txt or .parquet file",
                     f"save the {key} table as CSV (UTF-8) or Parquet")
        return None
    return _read_text(path, label, findings, wanted)


_NOT_UTF8 = re.compile("[\udc80-\udcff]")


def _decode(body: bytes, label: str, findings: Findings) -> tuple[str, bool]:
    """Check UTF-8; report bytes that are not UTF-8 (they become U+FFFD).

    Returns (header line, clean) for a clean file, (whole text, False) otherwise.
    """
    try:
        body.decode("utf-8")
    except UnicodeDecodeError:
        pass
    else:
        end = body.find(b"\n")
        return (body if end < 0 else body[:end]).decode("utf-8"), True
    # surrogateescape maps each undecodable byte to one lone surrogate, which valid text never holds
    text = body.decode("utf-8", errors="surrogateescape")
    first = _NOT_UTF8.search(text)
    fix = ("re-save the file as UTF-8 (in a spreadsheet: 'CSV UTF-8'; in a text editor: "
           "encoding UTF-8); the file is probably in a legacy encoding such as Latin-1 or Windows-1252")
    n = 0
    line, last = 1, 0
    for m in _NOT_UTF8.finditer(text, first.start()):
        n += 1
        if n <= _MAX_BAD_BYTES:
            line += text.count("\n", last, m.start())
            last = m.start()
            context = text[max(0, m.start() - 15): m.start() + 15].replace("\n", " ")
            context = _NOT_UTF8.sub("?", context)
            findings.add(label, f"byte 0x{ord(m.group()) - 0xDC00:02x} that is not UTF-8 text (near {context!r})",
                         "UTF-8 text", fix, row=line)
    if n > _MAX_BAD_BYTES:
        findings.add(label, f"... and {n - _MAX_BAD_BYTES} more bytes that are not UTF-8", "UTF-8 text", fix)
    return _NOT_UTF8.sub("\ufffd", text), False


def _sniff(header: str, suffix: str) -> str:
    counts = {d: header.count(d) for d in _DELIMITERS}
    if suffix in {".tsv", ".tab"} and counts["\t"]:
        return "\t"
    best = max(counts, key=lambda d: (counts[d], d == ","))
    return best if counts[best] else ","


def _read_text(path: Path, label: str, findings: Findings, wanted) -> TableFile | None:
    data = path.read_bytes()
    had_bom = data.startswith(codecs.BOM_UTF8)
    body = data[len(codecs.BOM_UTF8):] if had_bom else data
    if not body or body.isspace():
        findings.add(label, "an empty file", "a header line and at least one data row",
                     "export the table again; the file has no content")
        return None
    text, clean = _decode(body, label, findings)
    end = text.find("\n")
    header = text if end < 0 else text[:end]
    delim = _sniff(header.rstrip("\r"), path.suffix.lower())
    raw_names = next(csv.reader([header.rstrip("\r")], delimiter=delim), [])
    columns = [c.strip() for c in raw_names]
    if len(columns) == 1:  # every table of a study has several columns
        _one_column(columns[0], label, findings)
        return None
    keep = [r for r in raw_names if wanted is None or r.strip() in set(wanted)]
    first_break = body.find(b"\n")
    if first_break < 0 or not body[first_break + 1:].strip():
        # a header line alone: the caller reports the table as empty
        empty = pd.DataFrame({r: pd.Series([], dtype="str") for r in dict.fromkeys(keep)})
        empty.columns = [str(c).strip() for c in empty.columns]
        return TableFile(empty, columns, delimiter=delim, had_bom=had_bom)
    data = body if clean else text.encode("utf-8")
    try:
        try:
            df = _arrow_csv(data, delim, raw_names, keep)
        except Exception:  # noqa: BLE001
            if delim != "\t":
                raise
            # Darwin Core archives write tab-separated text without quoting: a '"' is just a character
            df = _arrow_csv(data, delim, raw_names, keep, quoting=False)
    except Exception as exc:  # noqa: BLE001 - any parser failure is a fault of the file
        if not _split_faults(text if not clean else body.decode("utf-8"), delim, len(raw_names), label, findings):
            findings.add(label, f"a line the table reader could not split ({str(exc).splitlines()[0][:200]})",
                         f"the same number of {_DELIMITERS[delim]}-separated cells on every line",
                         "check quoting (cells holding the separator must be in double quotes) and stray separators")
        return None
    df.columns = [str(c).strip() for c in df.columns]
    return TableFile(df, columns, delimiter=delim, had_bom=had_bom)


_OTHER_SEPARATORS = {"|": "vertical bar", ":": "colon", " ": "space"}


def _one_column(name: str, label: str, findings: Findings) -> None:
    """A header read as a single column: the file is separated by something else."""
    counts = {d: name.count(d) for d in _OTHER_SEPARATORS}
    best = max(counts, key=counts.get)
    guess = f" (it seems to be separated by {_OTHER_SEPARATORS[best]}s '{best}')" if counts[best] else ""
    findings.add(label, f"one column in the header line, {show(name)}{guess}",
                 "columns separated by commas, tabs or semicolons",
                 "save the table again as CSV (comma-separated) or TSV (tab-separated)", row=1)


def _split_faults(text: str, delim: str, n_columns: int, label: str, findings: Findings) -> bool:
    """Find the lines the fast reader could not split and report them; False if none is found.

    Only runs after the fast reader failed, so a plain Python scan of the file is fine here.
    """
    # tab-separated text was last tried without quoting (Darwin Core archives), so scan it the same way
    quoting = csv.QUOTE_NONE if delim == "\t" else csv.QUOTE_MINIMAL
    reader = csv.reader(io.StringIO(text), delimiter=delim, strict=True, quoting=quoting)
    what = _DELIMITERS[delim]
    rows, found = [], []
    start = 1
    try:
        for record in reader:
            end = reader.line_num
            if record and len(record) != n_columns and start > 1:
                rows.append(start)
                span = f" over lines {start}-{end} (a quoted cell runs across lines)" if end > start else ""
                found.append(f"{len(record)} {what}-separated cells{span}")
            start = end + 1
    except csv.Error:
        # the csv module stops at a quote left open until the end of the file
        findings.rows(label, None, rows, found, f"{n_columns} {what}-separated cells as in the header line",
                      "check quoting (cells holding the separator must be in double quotes) and stray separators")
        findings.add(label, 'a double quote (") that opens a cell and is never closed',
                     "each quoted cell to end with a closing double quote",
                     'close the quote, or remove the stray double quote from this line', row=start)
        return True
    if not rows:
        return False
    findings.rows(label, None, rows, found, f"{n_columns} {what}-separated cells as in the header line",
                  "check quoting (cells holding the separator must be in double quotes) and stray separators")
    return True


def _arrow_csv(data: bytes, delim: str, raw_names: list[str], keep: list[str], *,
               quoting: bool = True) -> pd.DataFrame:
    """Every cell as text (no type guessing), blank cells as empty strings; multi-threaded.

    Of repeated header names only the first column is read (the repeat is reported elsewhere).
    """
    import pyarrow as pa
    import pyarrow.csv as pcsv

    # Arrow names columns by position so repeated or odd header names cannot confuse it.
    names = [f"c{i}" for i in range(len(raw_names))]
    first = {}
    for n, r in zip(names, raw_names):
        first.setdefault(r, n)
    kept = [first[r] for r in dict.fromkeys(keep)]
    read = pcsv.ReadOptions(column_names=names, skip_rows=1)
    convert = pcsv.ConvertOptions(include_columns=kept, column_types={n: pa.string() for n in kept},
                                  strings_can_be_null=False, quoted_strings_can_be_null=False)
    parse = (pcsv.ParseOptions(delimiter=delim, newlines_in_values=True) if quoting
             else pcsv.ParseOptions(delimiter=delim, quote_char=False))
    table = pcsv.read_csv(io.BytesIO(data), read_options=read, parse_options=parse, convert_options=convert)
    df = table.to_pandas()
    df.columns = [raw_names[int(n[1:])] for n in df.columns]
    for c in df.columns:
        if df[c].dtype == object:
            df[c] = df[c].astype("str")
    return df


def _read_parquet(path: Path, label: str, findings: Findings, wanted) -> TableFile | None:
    import pyarrow.parquet as pq

    try:
        names = pq.read_schema(path).names
    except Exception as exc:  # noqa: BLE001 - any reader failure is a user-file problem
        findings.add(label, f"a file that is not readable Parquet ({type(exc).__name__}: {exc})",
                     "a Parquet file", "write the table again (for example with pandas DataFrame.to_parquet)")
        return None
    names = [n for n in names if not n.startswith("__index_level_")]
    cols = names if wanted is None else [n for n in names if n.strip() in set(wanted)]
    try:
        df = pd.read_parquet(path, columns=cols)
    except Exception as exc:  # noqa: BLE001
        findings.add(label, f"a Parquet file that could not be read ({type(exc).__name__}: {exc})",
                     "a Parquet file", "write the table again (for example with pandas DataFrame.to_parquet)")
        return None
    df = df.reset_index(drop=True)
    df.columns = [str(c).strip() for c in df.columns]
    return TableFile(df, [n.strip() for n in names])


def read_layer(path: Path, *, label: str, key: str, findings: Findings, layer: str | None = None,
               warn_layers: bool = True):
    """Read a vector layer as a GeoDataFrame (``None`` on failure, with a problem recorded)."""
    import geopandas as gpd

    if not _exists(path, label, key, findings):
        return None
    suffix = path.suffix.lower()
    if suffix not in LAYER_SUFFIXES:
        findings.add(label, f"a file ending in '{path.suffix}'",
                     "a GeoPackage (.gpkg), GeoJSON (.geojson), Shapefile (.shp) or GeoParquet (.parquet) layer",
                     f"save the {key} layer in one of these formats (for example from QGIS: Export > Save Features As)")
        return None
    try:
        if suffix in PARQUET_SUFFIXES:
            return gpd.read_parquet(path)
        import pyogrio

        layers = [row[0] for row in pyogrio.list_layers(path)]
        if layer is None and len(layers) > 1:
            layer = "regions" if "regions" in layers else layers[0]
            if warn_layers:
                findings.warn(f"{label} holds {len(layers)} layers ({', '.join(layers)}); read '{layer}'. "
                              f"Set [inputs] regions_layer in study.toml to choose another")
        elif layer is not None and layer not in layers:
            findings.add(label, f"no layer named '{layer}'", f"one of the layers {layers}",
                         "set [inputs] regions_layer to one of these names")
            return None
        return gpd.read_file(path, layer=layer, engine="pyogrio")
    except Exception as exc:  # noqa: BLE001 - any reader failure is a user-file problem
        findings.add(label, f"a layer that could not be read ({type(exc).__name__}: {exc})",
                     "a readable vector layer",
                     "open the file in QGIS to check it, and save it again as GeoPackage")
        return None
