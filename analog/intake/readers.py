"""Read input tables and layers from disk. The only module of intake that touches files.

Tables: CSV/TSV/TXT (UTF-8 with or without byte-order mark; the separator —
comma, tab or semicolon — is taken from the header line) and Parquet. Text files
are streamed in blocks of ``chunk_bytes`` (only the needed columns are kept), so a
many-gigabyte Darwin Core export is read in bounded memory.
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


# Bytes of a text file parsed at a time (one block becomes one chunk of rows).
CHUNK_BYTES = 1 << 24
_PROBE = 1 << 16


@dataclass
class TableFile:
    """What was read: the table (or its converted chunks) and how the file looked."""

    frame: pd.DataFrame | None    # the whole table; None when read with ``convert``
    columns: list[str]            # every column in the file, in order (names trimmed)
    delimiter: str | None = None  # text files only
    had_bom: bool = False
    notes: list[str] = field(default_factory=list)
    parts: list = field(default_factory=list)  # what ``convert`` returned for each chunk, in file order
    rows: int = 0                 # records read

    def __post_init__(self):
        if self.frame is not None and not self.rows:
            self.rows = len(self.frame)


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


def read_table(path: Path, *, label: str, key: str, findings: Findings, wanted=None, categorical=(),
               convert=None, chunk_bytes: int | None = None) -> TableFile | None:
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
    categorical : collection of str, optional
        Text columns whose values repeat (names, identifiers of other tables): read
        as categorical columns, each distinct value stored once.
    convert : callable, optional
        ``convert(frame, start, delimiter)`` is called on each chunk of rows
        (``start`` = position of its first record) and the results are kept in
        ``TableFile.parts`` instead of the rows; a Parquet table comes as one chunk.
    chunk_bytes : int, optional
        Bytes of a text file parsed at a time (default :data:`CHUNK_BYTES`).
    """
    if not _exists(path, label, key, findings):
        return None
    suffix = path.suffix.lower()
    if suffix in PARQUET_SUFFIXES:
        return _read_parquet(path, label, findings, wanted, categorical, convert)
    if suffix in {".xlsx", ".xls", ".ods"}:
        findings.add(label, "a spreadsheet workbook", "a CSV, TSV or Parquet file",
                     "save the sheet as 'CSV UTF-8' (or tab-separated text) and point study.toml at it")
        return None
    if suffix not in TEXT_SUFFIXES:
        findings.add(label, f"a file ending in '{path.suffix}'", "a .csv, .tsv, .txt or .parquet file",
                     f"save the {key} table as CSV (UTF-8) or Parquet")
        return None
    return _read_text(path, label, findings, wanted, set(categorical), convert, chunk_bytes or CHUNK_BYTES)


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


def _utf8_clean(path: Path, start: int) -> bool:
    """Whether the file from byte ``start`` on is UTF-8 (checked block by block)."""
    decoder = codecs.getincrementaldecoder("utf-8")("strict")
    with open(path, "rb") as fh:
        fh.seek(start)
        try:
            for block in iter(lambda: fh.read(1 << 23), b""):
                decoder.decode(block)
            decoder.decode(b"", final=True)
        except UnicodeDecodeError:
            return False
    return True


def _blank_from(fh, start: int) -> bool:
    """Whether the file holds only white space from byte ``start`` on."""
    fh.seek(start)
    for block in iter(lambda: fh.read(1 << 20), b""):
        if block.strip():
            return False
    return True


def _read_text(path: Path, label: str, findings: Findings, wanted, categorical, convert,
               chunk_bytes: int) -> TableFile | None:
    with open(path, "rb") as fh:
        had_bom = fh.read(len(codecs.BOM_UTF8)) == codecs.BOM_UTF8
        skip = len(codecs.BOM_UTF8) if had_bom else 0
        if _blank_from(fh, skip):
            findings.add(label, "an empty file", "a header line and at least one data row",
                         "export the table again; the file has no content")
            return None
        fh.seek(skip)
        header_bytes = fh.readline()
        header_only = not header_bytes.endswith(b"\n") or _blank_from(fh, skip + len(header_bytes))
    clean = _utf8_clean(path, skip)
    text = None
    if clean:
        header = header_bytes.decode("utf-8").rstrip("\n")
    else:
        body = path.read_bytes()[skip:]
        text, _ = _decode(body, label, findings)
        end = text.find("\n")
        header = text if end < 0 else text[:end]
    delim = _sniff(header.rstrip("\r"), path.suffix.lower())
    raw_names = next(csv.reader([header.rstrip("\r")], delimiter=delim), [])
    columns = [c.strip() for c in raw_names]
    if len(columns) == 1:  # every table of a study has several columns
        _one_column(columns[0], label, findings)
        return None
    keep = [r for r in raw_names if wanted is None or r.strip() in set(wanted)]
    if header_only:
        # a header line alone: the caller reports the table as empty
        empty = pd.DataFrame({r: pd.Series([], dtype="str") for r in dict.fromkeys(keep)})
        empty.columns = [str(c).strip() for c in empty.columns]
        out = TableFile(empty, columns, delimiter=delim, had_bom=had_bom)
        if convert is not None:
            out.parts, out.frame = [convert(empty, 0, delim)], None
        return out

    def source():  # the records, after the header line
        if clean:
            f = pa.OSFile(str(path))
            f.seek(skip + len(header_bytes))
            return f
        data = text.encode("utf-8")
        return io.BytesIO(data[data.find(b"\n") + 1:])

    import pyarrow as pa

    def stream(quoting=True):
        size = chunk_bytes
        while True:
            try:
                return _arrow_csv(source(), delim, raw_names, keep, categorical, convert, size, quoting=quoting)
            except pa.ArrowInvalid as exc:
                # a record longer than a block: read again in larger blocks (results do not depend on it)
                if "straddl" not in str(exc) or size > path.stat().st_size:
                    raise
                size *= 4

    try:
        try:
            parts, n = stream()
        except Exception:  # noqa: BLE001
            if delim != "\t":
                raise
            # Darwin Core archives write tab-separated text without quoting: a '"' is just a character
            parts, n = stream(quoting=False)
    except Exception as exc:  # noqa: BLE001 - any parser failure is a fault of the file
        lines = io.StringIO(text) if not clean else open(path, encoding="utf-8-sig", newline="")
        with lines:
            found = _split_faults(lines, delim, len(raw_names), label, findings)
        if not found:
            findings.add(label, f"a line the table reader could not split ({str(exc).splitlines()[0][:200]})",
                         f"the same number of {_DELIMITERS[delim]}-separated cells on every line",
                         "check quoting (cells holding the separator must be in double quotes) and stray separators")
        return None
    if convert is not None:
        return TableFile(None, columns, delimiter=delim, had_bom=had_bom, parts=parts, rows=n)
    df = pd.concat(parts, ignore_index=True) if len(parts) > 1 else parts[0]
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


def _split_faults(lines, delim: str, n_columns: int, label: str, findings: Findings) -> bool:
    """Find the lines the fast reader could not split and report them; False if none is found.

    ``lines`` is the text as a stream. Only runs after the fast reader failed, so a plain
    Python scan of the file is fine here.
    """
    # tab-separated text was last tried without quoting (Darwin Core archives), so scan it the same way
    quoting = csv.QUOTE_NONE if delim == "\t" else csv.QUOTE_MINIMAL
    reader = csv.reader(lines, delimiter=delim, strict=True, quoting=quoting)
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


def _arrow_csv(source, delim: str, raw_names: list[str], keep: list[str], categorical, convert,
               chunk_bytes: int, *, quoting: bool = True) -> tuple[list, int]:
    """Stream the file block by block: every cell as text (no type guessing), blank cells as
    empty strings, the ``categorical`` columns dictionary-coded as they are read.

    Returns the chunks (or what ``convert`` made of each) and the number of records.
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
    types = {n: (pa.dictionary(pa.int32(), pa.string()) if raw_names[int(n[1:])].strip() in categorical
                 else pa.string()) for n in kept}
    read = pcsv.ReadOptions(column_names=names, block_size=max(int(chunk_bytes), 1))
    convert_opts = pcsv.ConvertOptions(include_columns=kept, column_types=types,
                                       strings_can_be_null=False, quoted_strings_can_be_null=False)
    parse = (pcsv.ParseOptions(delimiter=delim, newlines_in_values=True) if quoting
             else pcsv.ParseOptions(delimiter=delim, quote_char=False))
    parts, start = [], 0
    with source:
        reader = pcsv.open_csv(source, read_options=read, parse_options=parse, convert_options=convert_opts)
        for batch in reader:
            if batch.num_rows == 0:
                continue
            df = batch.to_pandas()
            df.columns = [raw_names[int(n[1:])].strip() for n in df.columns]
            for c in df.columns:
                if df[c].dtype == object:
                    df[c] = df[c].astype("str")
            df.index = pd.RangeIndex(start, start + len(df))
            parts.append(df if convert is None else convert(df, start, delim))
            start += len(df)
    if not parts:
        empty = pd.DataFrame({raw_names[int(n[1:])].strip(): pd.Series([], dtype="str") for n in kept})
        parts = [empty if convert is None else convert(empty, 0, delim)]
    return parts, start


def _read_parquet(path: Path, label: str, findings: Findings, wanted, categorical=(),
                  convert=None) -> TableFile | None:
    import pyarrow as pa
    import pyarrow.parquet as pq

    try:
        schema = pq.read_schema(path)
    except Exception as exc:  # noqa: BLE001 - any reader failure is a user-file problem
        findings.add(label, f"a file that is not readable Parquet ({type(exc).__name__}: {exc})",
                     "a Parquet file", "write the table again (for example with pandas DataFrame.to_parquet)")
        return None
    names = [n for n in schema.names if not n.startswith("__index_level_")]
    cols = names if wanted is None else [n for n in names if n.strip() in set(wanted)]
    # repeated text read dictionary-coded: each distinct name held once (Parquet usually stores it so)
    text_types = (pa.string(), pa.large_string())
    as_dict = [n for n in cols if n.strip() in set(categorical) and schema.field(n).type in text_types]
    try:
        table = pq.read_table(path, columns=cols, read_dictionary=as_dict or None)
        df = table.to_pandas()
        del table
    except Exception as exc:  # noqa: BLE001
        findings.add(label, f"a Parquet file that could not be read ({type(exc).__name__}: {exc})",
                     "a Parquet file", "write the table again (for example with pandas DataFrame.to_parquet)")
        return None
    df = df.reset_index(drop=True)
    df.columns = [str(c).strip() for c in df.columns]
    out = TableFile(df, [n.strip() for n in names])
    if convert is not None:
        out.parts, out.frame = [convert(df, 0, None)], None
    return out


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
