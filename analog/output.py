"""The one place that writes: an output folder, written atomically.

Everything is first written into a hidden temporary folder next to the target
(same file system), then swapped in with renames. An interrupted run leaves any
earlier output intact and no partial files; the inputs are never touched.
"""
from __future__ import annotations

import csv
import io
import json
import os
import re
import shutil
import signal
import tempfile
import threading
from contextlib import contextmanager
from pathlib import Path

import pandas as pd

from .errors import InputError, Problem

__all__ = ["OutputFolder", "check_output_target", "frame_to_csv_bytes", "render_figure", "tight_bbox"]

FLOAT_FORMAT = "%.6g"
LAYER_TIMESTAMP = "2000-01-01T00:00:00.000Z"   # fixed GeoPackage change time (see OutputFolder.write_layer)


def frame_to_csv_bytes(frame: pd.DataFrame) -> bytes:
    """Deterministic CSV bytes: fixed float format, '\\n' line endings, UTF-8.

    The text is that of ``frame.to_csv(index=False, float_format=FLOAT_FORMAT,
    lineterminator="\\n")``. For the usual column types (NumPy numbers and booleans, strings,
    nullable extension types, objects) the fields are made here column by column, as pandas
    makes them; when no field needs quoting (and there are two columns or more) the lines are
    joined directly, otherwise the same :mod:`csv` writer as pandas' writes them. Anything else
    is left to pandas.
    """
    made = _csv_fields(frame)
    buf = io.StringIO()
    if made is None:
        frame.to_csv(buf, index=False, float_format=FLOAT_FORMAT, lineterminator="\n")
        return buf.getvalue().encode("utf-8")
    columns, plain = made
    header = list(frame.columns)
    if plain and len(columns) > 1 and not any(_NEEDS_QUOTES.search(h) for h in header):
        # minimal quoting quotes a field only for a delimiter, quote character or line break in it
        # (or an empty field alone on its line), so without those the writer's output is the fields
        # joined by commas, one line per row
        rows = "\n".join(map(",".join, zip(*columns)))
        return (",".join(header) + "\n" + rows + ("\n" if rows or columns[0] else "")).encode("utf-8")
    writer = csv.writer(buf, lineterminator="\n", delimiter=",", quoting=csv.QUOTE_MINIMAL,
                        doublequote=True, escapechar=None, quotechar='"')
    writer.writerow(header)
    writer.writerows(zip(*columns))
    return buf.getvalue().encode("utf-8")


_NEEDS_QUOTES = re.compile(r'[,"\r\n]')


def _csv_fields(frame: pd.DataFrame) -> tuple[list[list], bool] | None:
    """Each column's CSV fields, as ``DataFrame.to_csv`` (na_rep '', float_format FLOAT_FORMAT,
    minimal quoting) hands them to the csv writer, and whether every field is a str the writer
    would write unquoted; None for a frame this does not cover."""
    import numpy as np
    from pandas.api.extensions import ExtensionArray

    if not len(frame.columns) or isinstance(frame.columns, pd.MultiIndex) \
            or not all(isinstance(c, str) for c in frame.columns):
        return None
    out = []
    plain = True
    for i in range(frame.shape[1]):
        column = frame.iloc[:, i]
        dtype = column.dtype
        values = column.array
        if isinstance(dtype, np.dtype):
            values = column.to_numpy()
            if dtype.kind == "f":
                out.append(_float_fields(values))
            elif dtype.kind in "iub":  # as pandas: the Python int or bool, written with str()
                out.append(list(map(str, values.tolist())))
            elif dtype.kind == "O":
                fields = np.array(values, dtype=object)
                fields[pd.isna(fields)] = ""
                fields = fields.tolist()
                plain = plain and _plain_text(fields)
                out.append(fields)
            else:
                return None
        elif isinstance(values, ExtensionArray) and dtype.kind not in "fcmMV" \
                and not isinstance(dtype, (pd.IntervalDtype, pd.SparseDtype, pd.CategoricalDtype, pd.PeriodDtype)):
            fields = np.asarray(values.astype(object))
            missing = np.asarray(values.isna())
            fields[missing] = ""
            fields = fields.tolist()
            if dtype.kind in "iub":  # nullable integers and booleans: the writer's str() of each value
                for j in np.flatnonzero(~missing).tolist():
                    fields[j] = str(fields[j])
            elif plain:
                if isinstance(dtype, pd.StringDtype):
                    plain = not column.str.contains(_NEEDS_QUOTES.pattern, regex=True, na=False).any()
                else:
                    plain = _plain_text(fields)
            out.append(fields)
        else:
            return None
    return out, plain


def _plain_text(fields: list) -> bool:
    """Every field a str that minimal quoting leaves as it is."""
    return all(type(f) is str for f in fields) and not any(_NEEDS_QUOTES.search(f) for f in fields)


def _float_fields(values) -> list[str]:
    """``FLOAT_FORMAT % value`` per value, '' for NaN. Columns with many repeated values (bins,
    counts, coordinates of shared sites) format each distinct bit pattern once."""
    import numpy as np

    values = np.ascontiguousarray(values)
    if values.itemsize in (2, 4, 8) and len(values) > 1000:
        codes, distinct = pd.factorize(values.view(f"i{values.itemsize}"))  # equal bits, equal text
        if len(distinct) <= len(values) // 2:
            floats = distinct.view(values.dtype)
            text = np.array(list(map(FLOAT_FORMAT.__mod__, floats.tolist())), dtype=object)
            text[np.isnan(floats)] = ""
            return text[codes].tolist()
    text = list(map(FLOAT_FORMAT.__mod__, values.tolist()))
    for j in np.flatnonzero(np.isnan(values)).tolist():
        text[j] = ""
    return text


def check_output_target(out: Path) -> None:
    """Fail early (exit code 2) when the output folder cannot be written."""
    out = Path(out)
    problems = []
    if out.exists() and not out.is_dir():
        problems.append(Problem(str(out), "a file where the output folder should be", "a folder (or a new path)",
                                "choose another --out path or move the file away"))
    if out.is_dir() and any(out.iterdir()) and not (out / "manifest.json").is_file():
        problems.append(Problem(str(out), "a folder that already holds other files", "an empty folder, a new path, "
                                "or an earlier analog output folder (it has manifest.json)",
                                "choose a new --out path; analog replaces only its own earlier output"))
    parent = out if out.is_dir() else out.parent
    while not parent.exists():
        parent = parent.parent
    if not os.access(parent, os.W_OK | os.X_OK):
        problems.append(Problem(str(parent), "a folder this user cannot write to", "a writable folder",
                                "choose an --out path you can write to, or change the folder's permissions"))
    if problems:
        raise InputError(problems)


_FIXED_METADATA = {"png": {"Software": None}, "svg": {"Date": None, "Creator": None},
                   "pdf": {"CreationDate": None, "ModDate": None, "Creator": None, "Producer": None}}


def tight_bbox(fig):
    """The figure's tight bounding box (inches), padded as ``savefig`` pads it, from one layout pass.

    Passing it to :func:`render_figure` for every format saves the layout pass that
    ``bbox_inches='tight'`` makes per format (the text layout dominates render time).
    """
    from contextlib import nullcontext

    import matplotlib
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    if not isinstance(fig.canvas, FigureCanvasAgg):
        FigureCanvasAgg(fig)  # attaches itself to ``fig``
    renderer = fig.canvas.get_renderer()
    # a draw that runs any layout engine and places every text but paints nothing (as savefig's own
    # layout pass does)
    with getattr(renderer, "_draw_disabled", nullcontext)():
        fig.draw(renderer)
    pad = matplotlib.rcParams["savefig.pad_inches"]
    return fig.get_tightbbox(renderer).padded(pad)


def render_figure(fig, fmt: str, *, dpi: int = 300, bbox=None) -> bytes:
    """Render a Figure to bytes in memory, with fixed metadata so reruns are byte-identical.

    ``bbox`` (inches, e.g. from :func:`tight_bbox`) is the area saved; by default the
    tight bounding box, found by an extra layout pass.
    """
    import matplotlib

    if fmt == "png":
        data = _png_bytes(fig, dpi=dpi, bbox=tight_bbox(fig) if bbox is None else bbox)
        if data is not None:
            return data
    buf = io.BytesIO()
    with matplotlib.rc_context({"svg.hashsalt": "analog"}):
        fig.savefig(buf, format=fmt, dpi=dpi, bbox_inches="tight" if bbox is None else bbox,
                    metadata=_FIXED_METADATA.get(fmt, {}))
    return buf.getvalue()


def _png_bytes(fig, *, dpi: int, bbox) -> bytes | None:
    """PNG of an opaque figure as an RGB image (no alpha channel); None to fall back to ``savefig``.

    Matplotlib writes RGBA at zlib level 6. Without the constant alpha channel and at level 3
    the file is about as large and the compression, the slowest step of a PNG, takes about
    half as long.
    """
    import numpy as np
    from PIL import Image

    buf = io.BytesIO()
    fig.savefig(buf, format="rgba", dpi=dpi, bbox_inches=bbox)
    raw = buf.getvalue()
    # the canvas of a bbox_inches render is int(size * dpi) pixels (RendererAgg truncates)
    width, height = int(bbox.width * dpi), int(bbox.height * dpi)
    if width * height * 4 != len(raw):
        return None
    if np.frombuffer(raw, dtype=np.uint8)[3::4].min() < 255:
        return None   # transparency drawn: keep matplotlib's RGBA file
    image = Image.frombuffer("RGBA", (width, height), raw, "raw", "RGBA", 0, 1).convert("RGB")
    out = io.BytesIO()
    # no text chunks (as metadata={'Software': None}); pHYs carries the dpi as matplotlib writes it
    image.save(out, format="png", dpi=(dpi, dpi), compress_level=3)
    return out.getvalue()


@contextmanager
def _signals_held():
    """Block SIGINT/SIGTERM for a few critical system calls; they are delivered afterwards."""
    held = {signal.SIGINT, signal.SIGTERM}
    can_mask = hasattr(signal, "pthread_sigmask") and threading.current_thread() is threading.main_thread()
    if can_mask:
        previous = signal.pthread_sigmask(signal.SIG_BLOCK, held)
    try:
        yield
    finally:
        if can_mask:
            signal.pthread_sigmask(signal.SIG_SETMASK, previous)


class OutputFolder:
    """Collects files in a temporary sibling folder; ``commit()`` swaps it into place.

    Use as a context manager: on an exception (or KeyboardInterrupt) the temporary
    folder is removed and the target is left as it was.
    """

    def __init__(self, target: str | os.PathLike):
        self.target = Path(target).resolve()
        check_output_target(self.target)
        self.target.parent.mkdir(parents=True, exist_ok=True)
        self.tmp: Path | None = None
        try:
            with _signals_held():  # a signal that came while the folder was made is delivered on leaving
                self.tmp = Path(tempfile.mkdtemp(prefix=f".{self.target.name}.partial-", dir=self.target.parent))
        except BaseException:
            if self.tmp is not None:  # no caller holds this object yet: clean up here
                shutil.rmtree(self.tmp, ignore_errors=True)
            raise
        self.written: list[str] = []

    # -- writing -------------------------------------------------------------------------------
    def path(self, relative: str) -> Path:
        p = self.tmp / relative
        p.parent.mkdir(parents=True, exist_ok=True)
        return p

    def write_bytes(self, relative: str, data: bytes) -> None:
        self.path(relative).write_bytes(data)
        self.written.append(relative)

    def write_text(self, relative: str, text: str) -> None:
        self.write_bytes(relative, text.encode("utf-8"))

    def write_table(self, relative: str, frame: pd.DataFrame) -> None:
        self.write_bytes(relative, frame_to_csv_bytes(frame))

    def write_json(self, relative: str, obj) -> None:
        self.write_text(relative, json.dumps(obj, indent=2, sort_keys=True, ensure_ascii=False, default=str) + "\n")

    def write_figure(self, stem: str, fig, *, formats=("png", "svg"), dpi: int = 300,
                     folder: str = "figures") -> dict[str, bytes]:
        """Save a matplotlib Figure in each format; returns the bytes written per format."""
        import matplotlib.pyplot as plt

        out = {}
        bbox = tight_bbox(fig) if len(formats) > 1 else None
        for fmt in formats:
            data = render_figure(fig, fmt, dpi=dpi, bbox=bbox)
            self.write_bytes(f"{folder}/{stem}.{fmt}", data)
            out[fmt] = data
        plt.close(fig)
        return out

    def write_layer(self, relative: str, gdf, *, layer: str | None = None) -> None:
        """Write a GeoPackage layer; its timestamps are fixed so a rerun writes the same bytes."""
        import pyogrio

        # GeoPackage records the write time (gpkg_contents.last_change); GDAL takes it from
        # OGR_CURRENT_DATE when set. The run time is recorded in manifest.json instead.
        before = pyogrio.get_gdal_config_option("OGR_CURRENT_DATE")
        pyogrio.set_gdal_config_options({"OGR_CURRENT_DATE": LAYER_TIMESTAMP})
        try:
            gdf.to_file(self.path(relative), driver="GPKG", layer=layer or Path(relative).stem, engine="pyogrio")
        finally:
            pyogrio.set_gdal_config_options({"OGR_CURRENT_DATE": before})
        self.written.append(relative)

    # -- committing ----------------------------------------------------------------------------
    def commit(self) -> Path:
        """Swap the finished folder into place; an earlier output folder is replaced whole.

        SIGINT and SIGTERM are held back during the two renames, so an interruption
        lands before the swap (earlier output intact) or after it (new output complete).
        """
        with _signals_held():
            backup = None
            if self.target.exists():
                backup = self.target.with_name(f".{self.target.name}.previous-{os.getpid()}")
                os.rename(self.target, backup)
            try:
                os.rename(self.tmp, self.target)
            except BaseException:
                if backup is not None:
                    os.rename(backup, self.target)
                raise
            if backup is not None:
                shutil.rmtree(backup, ignore_errors=True)
        return self.target

    def discard(self) -> None:
        shutil.rmtree(self.tmp, ignore_errors=True)

    def __enter__(self):
        return self

    def __exit__(self, exc_type, exc, tb):
        if exc_type is not None:
            self.discard()
        return False
