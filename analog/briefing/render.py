"""Turn a finished run into the HTML briefing and one page per region.

Pure: :func:`build_briefing` returns the pages as text and writes nothing; the
output writer saves them. The markup lives in jinja2 templates (autoescaped);
this module only gathers the numbers and words the templates show.
"""
from __future__ import annotations

import base64
import functools
import io
import importlib
import inspect
import math
import re
import warnings
from dataclasses import dataclass
from importlib import resources
from pathlib import Path
from typing import Any, Mapping

import jinja2
import markupsafe
import numpy as np
import pandas as pd

from .. import __version__
from ..errors import AnalogWarning
from ..figures.style import NO_DATA_COLOUR, TIER_COLOURS, TIER_NAMES
from .references import REFERENCES

__all__ = ["build_briefing", "region_page_name"]

MISSING = "—"  # shown for a value that could not be computed
INSET_DPI = 150


# --------------------------------------------------------------------------------------------------
# small value helpers
# --------------------------------------------------------------------------------------------------
def _missing(x: Any) -> bool:
    if x is None:
        return True
    try:
        return bool(pd.isna(x))
    except (TypeError, ValueError):
        return False


def _float(x: Any) -> float:
    """A float, or NaN for anything missing or not a number."""
    if type(x) is float:  # the common case, NaN included
        return x
    if _missing(x):
        return math.nan
    try:
        return float(x)
    except (TypeError, ValueError):
        return math.nan


def _minus(text: str) -> str:
    # a true minus sign reads better than a hyphen in tables
    return text.replace("-", "\u2212") if text.startswith("-") else text


def fmt_num(x: Any, digits: int = 2) -> str:
    v = _float(x)
    if math.isnan(v):
        return MISSING
    if math.isinf(v):
        return "∞" if v > 0 else "\u2212∞"
    text = f"{v:.{digits}f}"
    if float(text) == 0:
        text = text.lstrip("-")  # no "-0.00"
    return _minus(text)


def fmt_p(x: Any) -> str:
    """A probability or score on 0..1: two decimals, '<0.01' for small non-zero values."""
    v = _float(x)
    if 0 < v < 0.005:
        return "<0.01"
    if 0.995 < v < 1:
        return ">0.99"
    return fmt_num(v)


def fmt_count(x: Any) -> str:
    """Whole numbers as such; averages over draws with one decimal."""
    v = _float(x)
    if math.isnan(v) or abs(v - round(v)) < 1e-9:
        return fmt_int(v)
    return fmt_num(v, 1)


def fmt_pvalue(x: Any) -> str:
    v = _float(x)
    if math.isnan(v):
        return MISSING
    return "<0.001" if v < 0.001 else f"{v:.3f}"


def fmt_int(x: Any) -> str:
    v = _float(x)
    return MISSING if math.isnan(v) else _minus(f"{int(round(v)):,}")


def fmt_ratio(x: Any) -> str:
    """Odds ratios: two decimals in the usual range, three significant digits outside it."""
    v = _float(x)
    if math.isnan(v):
        return MISSING
    if math.isinf(v):
        return "∞"
    return f"{v:.2f}" if 0.01 <= v < 100 else f"{v:.3g}"


def fmt_pct(x: Any) -> str:
    v = _float(x)
    return MISSING if math.isnan(v) else f"{100 * v:.0f}%"


def fmt_prange(low: Any, high: Any) -> str:
    return fmt_range(low, high, fmt=fmt_p)


def fmt_range(low: Any, high: Any, digits: int = 2, *, fmt=None) -> str:
    f = fmt or (lambda v: fmt_num(v, digits))
    if math.isnan(_float(low)) and math.isnan(_float(high)):
        return MISSING
    return f"{f(low)} to {f(high)}"


def sort_key(x: Any) -> str:
    """Value for a cell's data-sort attribute: a plain number, or '' for missing (sorted last)."""
    v = _float(x)
    if math.isnan(v):
        return ""
    if math.isinf(v):
        return "1e308" if v > 0 else "-1e308"
    return f"{v:.10g}"


def _text(x: Any, default: str = "") -> str:
    return default if _missing(x) else str(x)


def _pretty(name: str) -> str:
    return str(name).replace("_", " ").strip()


# --------------------------------------------------------------------------------------------------
# structures handed to the templates
# --------------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Tier:
    name: str
    colour: str
    ink: str  # text colour on the tier colour, chosen for contrast
    order: int


@dataclass(frozen=True)
class Taxon:
    taxon_id: str
    name: str
    italic: bool


@dataclass(frozen=True)
class Cell:
    """One table cell. ``kind`` picks the template macro: text, num, taxon, tier, interval, link."""

    text: str = ""
    sort: str | None = None
    kind: str = "text"
    title: str = ""
    href: str = ""
    taxon: Taxon | None = None
    tier: Tier | None = None
    bar: tuple[float, float, float] | None = None  # low, mid, high on 0..1 for an interval bar


@dataclass(frozen=True)
class Column:
    label: str
    numeric: bool = False
    help: str = ""


@dataclass
class Table:
    """A table; ``sortable`` tables get header buttons and the sorting script.

    A row is a list of cells, or the row's cells already rendered (a ``str`` of ``<td>``
    elements, as :func:`_cells_html` writes them), for large tables whose rows repeat.
    """

    id: str
    caption: str
    columns: list[Column]
    rows: list[list[Cell] | str]
    sortable: bool = True
    sorted_by: int | None = None
    sorted_dir: str = "ascending"
    note: str = ""

    @property
    def empty(self) -> bool:
        return not self.rows

    @property
    def body(self) -> markupsafe.Markup:
        """The ``<tr>`` elements of the table body."""
        return markupsafe.Markup("".join(
            f"<tr>\n{row if isinstance(row, str) else _cells_html(row)}</tr>\n" for row in self.rows))


# --------------------------------------------------------------------------------------------------
# markup of table cells (autoescaped as in the templates; large tables are rendered here, not cell
# by cell in jinja)
# --------------------------------------------------------------------------------------------------
_ESCAPES = str.maketrans({"&": "&amp;", "<": "&lt;", ">": "&gt;", '"': "&#34;", "'": "&#39;"})


def _esc(value: Any) -> str:
    """``markupsafe.escape(value)`` as text (the same five entities), without building Markup objects."""
    if hasattr(value, "__html__"):
        return str(value.__html__())
    return str(value).translate(_ESCAPES)


def _taxon_markup(t: Taxon) -> str:
    return f"<i>{_esc(t.name)}</i>" if t.italic else _esc(t.name)


def _tier_chip_markup(tier: Tier) -> str:
    return (f'<span class="tier" style="background-color: {_esc(tier.colour)}; color: {_esc(tier.ink)};">'
            f'{_esc(tier.name)}</span>')


def taxon_html(t: Taxon) -> markupsafe.Markup:
    """A taxon name, in italics from genus down."""
    return markupsafe.Markup(_taxon_markup(t))


def tier_chip_html(tier: Tier) -> markupsafe.Markup:
    """A tier's name on its colour."""
    return markupsafe.Markup(_tier_chip_markup(tier))


def _cell_html(c: Cell) -> str:
    """One ``<td>`` element and its line ending."""
    sort = "" if c.sort is None else f' data-sort="{_esc(c.sort)}"'
    title = f' title="{_esc(c.title)}"' if c.title else ""
    if c.kind == "taxon":
        return f'<td class="taxon"{sort}>{_taxon_markup(c.taxon)}</td>\n'
    if c.kind == "tier":
        return f'<td data-sort="{_esc(c.sort)}">{_tier_chip_markup(c.tier)}</td>\n'
    if c.kind == "interval":
        bar = ""
        if c.bar:
            low, mid, high = c.bar
            bar = (f'<span class="ibar" aria-hidden="true"><span class="ibar-range" style="left: '
                   f'{100 * low:.1f}%; width: {100 * (high - low):.1f}%;"></span><span class="ibar-mid" '
                   f'style="left: {100 * mid:.1f}%;"></span></span>')
        return (f'<td class="num interval" data-sort="{_esc(c.sort)}"{title}>\n{bar}'
                f'<span class="itext">{_esc(c.text)}</span></td>\n')
    if c.kind == "link":
        return f'<td data-sort="{_esc(c.sort)}"><a href="{_esc(c.href)}">{_esc(c.text)}</a></td>\n'
    if c.kind == "flag":
        return f'<td class="flag" data-sort="{_esc(c.sort)}">{_esc(c.text)}</td>\n'
    if c.kind == "num":
        return f'<td class="num"{sort}{title}>{_esc(c.text)}</td>\n'
    return f"<td{sort}{title}>{_esc(c.text)}</td>\n"


def _cells_html(cells: list[Cell]) -> str:
    """A row's cells, each followed by an empty line (as the templates lay them out)."""
    return "".join(_cell_html(c) + "\n" for c in cells)


@dataclass(frozen=True)
class FigureRef:
    stem: str
    src: str
    alt: str
    caption: str
    width: int = 0   # pixels of the embedded image (0 = unknown)
    height: int = 0
    size: str = "normal"  # layout class: 'normal', 'wide' or 'inset'


@dataclass
class RegionView:
    region_id: str
    slug: str
    name: str
    flagged: bool
    flag: str
    indices: list[tuple[str, str, str]]  # label, value, explanation
    by_line: list[tuple[str, str, str]]  # index, analog value, trajectory value
    top: Table
    present: Table
    inset: FigureRef | None
    n_present: int
    n_assessed: int
    standing: str = ""  # how the region compares with the others, in words
    n_shown: int = 0    # rows of the region page's table of taxa (at most MAX_REGION_ROWS)


# --------------------------------------------------------------------------------------------------
# reading the run
# --------------------------------------------------------------------------------------------------
def _tables(result: Any) -> dict[str, pd.DataFrame]:
    if result is None:
        return {}
    try:
        out = result.tables()
    except Exception as exc:  # noqa: BLE001 - a broken stage result must not take the briefing down
        warnings.warn(f"briefing: could not read the tables of {type(result).__name__} ({exc}); "
                      "its sections say that no data are available", AnalogWarning, stacklevel=3)
        return {}
    return {k: v for k, v in (out or {}).items() if isinstance(v, pd.DataFrame)}


def _contrast_ink(colour: str) -> str:
    """Black or white text, whichever contrasts more with ``colour`` (WCAG 2 relative luminance)."""
    hexes = colour.lstrip("#")
    rgb = [int(hexes[i:i + 2], 16) / 255 for i in (0, 2, 4)]
    lin = [c / 12.92 if c <= 0.03928 else ((c + 0.055) / 1.055) ** 2.4 for c in rgb]
    lum = 0.2126 * lin[0] + 0.7152 * lin[1] + 0.0722 * lin[2]
    on_white = (lum + 0.05) / 0.05          # contrast of black text
    on_black = 1.05 / (lum + 0.05)          # contrast of white text
    return "#000000" if on_white >= on_black else "#ffffff"


TIERS = {name: Tier(name, TIER_COLOURS.get(name, NO_DATA_COLOUR), _contrast_ink(TIER_COLOURS.get(name, NO_DATA_COLOUR)),
                    i) for i, name in enumerate(TIER_NAMES)}
NOT_ASSESSED = Tier("not assessed", "#ffffff", "#333333", len(TIER_NAMES))


def _tier(value: Any) -> Tier:
    name = _text(value).strip()
    if not name:
        return NOT_ASSESSED
    return TIERS.get(name, Tier(name, NO_DATA_COLOUR, _contrast_ink(NO_DATA_COLOUR), len(TIER_NAMES)))


_OK_FLAGS = {"", "ok", "sufficient", "adequate", "good", "enough", "none", "false", "0", "nan"}


def _flagged(value: Any) -> bool:
    if _missing(value):
        return False
    return str(value).strip().lower() not in _OK_FLAGS


_SLUG = re.compile(r"[^A-Za-z0-9._-]+")


def region_page_name(region_id: Any, taken: set[str] | None = None) -> str:
    """File-name-safe form of a region id (``regions/<this>.html``); unique within ``taken``."""
    base = _SLUG.sub("_", str(region_id)).strip("._") or "region"
    slug, n = base, 2
    while taken is not None and slug in taken:
        slug, n = f"{base}-{n}", n + 1
    if taken is not None:
        taken.add(slug)
    return slug


class _Run:
    """Read-only view of a RunResult that never raises on a missing stage, table or column."""

    def __init__(self, run: Any, figures: Mapping[str, Mapping[str, bytes]] | None):
        self.run = run
        self.study = run.study
        self.config = self.study.config
        self.figures = dict(figures or {})
        self.used_figures: set[str] = set()
        self.analog_tables = _tables(getattr(run, "analog", None))
        self.trajectory_tables = _tables(getattr(run, "trajectory", None))
        self.combined_tables = _tables(getattr(run, "combined", None))
        self.regions_tables = _tables(getattr(run, "regions", None))
        self.skipped = dict(getattr(run, "skipped", {}) or {})
        taxa = getattr(self.study, "taxa", None)
        self.taxa = taxa if isinstance(taxa, pd.DataFrame) else pd.DataFrame(columns=["taxon_id"])

    # -- generic ---------------------------------------------------------------------------------
    def table(self, stage: str, name: str) -> pd.DataFrame | None:
        tables = getattr(self, f"{stage}_tables")
        frame = tables.get(name)
        return frame if frame is not None and len(frame.columns) else None

    def params(self, section: str) -> Any:
        sections = getattr(self.config, "sections", {}) or {}
        return sections.get(section)

    def param(self, section: str, name: str, default: Any = None) -> Any:
        return getattr(self.params(section), name, default)

    def why_missing(self, stage: str) -> str:
        why = self.skipped.get(stage)
        return f"This part did not run: {why}." if why else "No data are available for this part."

    # -- taxa ------------------------------------------------------------------------------------
    def taxon(self, taxon_id: Any, name: Any = None) -> Taxon:
        tid = _text(taxon_id)
        if not hasattr(self, "_taxon_index"):
            t = self.taxa
            cols = [c for c in ("taxon_id", "scientificName", "taxonRank") if c in t.columns]
            self._taxon_index = {str(r["taxon_id"]): r for r in t[cols].to_dict("records")} if "taxon_id" in cols else {}
        row = self._taxon_index.get(tid, {})
        label = _text(name) or _text(row.get("scientificName")) or tid
        rank = _text(row.get("taxonRank")).strip().lower()
        # genus and below are printed in italics (ICZN/ICN convention)
        italic = rank in {"genus", "subgenus", "species", "subspecies", "variety", "form"}
        return Taxon(tid, label, italic)

    # -- figures ---------------------------------------------------------------------------------
    def figure(self, stem: str, *, alt: str, caption: str) -> FigureRef | None:
        formats = self.figures.get(stem)
        if not formats:
            return None
        self.used_figures.add(stem)
        dpi = _float(self.param("figures", "dpi", 300))
        return _figure_ref(stem, formats, alt=alt, caption=caption, dpi=300.0 if math.isnan(dpi) else dpi)


EMBED_MAX_PX = 2400  # wider PNGs are downsampled for embedding (8 inches at 300 dpi is plenty on screen and paper)
_SVG_SIZE = re.compile(r'<svg[^>]*?\swidth="([\d.]+)(pt|px)?"[^>]*?\sheight="([\d.]+)(pt|px)?"', re.DOTALL)


def _png_size(data: bytes) -> tuple[int, int]:
    """Width and height from a PNG's IHDR chunk (0, 0 if it is not a PNG)."""
    if data[:8] != b"\x89PNG\r\n\x1a\n" or data[12:16] != b"IHDR":
        return 0, 0
    return int.from_bytes(data[16:20], "big"), int.from_bytes(data[20:24], "big")


def _svg_size(data: bytes) -> tuple[float, float]:
    """Width and height in CSS pixels from the root element (0, 0 when not stated)."""
    hit = _SVG_SIZE.search(data[:4000].decode("utf-8", "replace"))
    if not hit:
        return 0.0, 0.0
    scale = 4 / 3 if (hit.group(2) or "px") == "pt" else 1.0  # 1 pt = 4/3 CSS px
    return float(hit.group(1)) * scale, float(hit.group(3)) * scale


def _embeddable_png(data: bytes) -> tuple[bytes, int, int]:
    w, h = _png_size(data)
    if w <= EMBED_MAX_PX:
        return data, w, h
    from PIL import Image  # a dependency of matplotlib

    with Image.open(io.BytesIO(data)) as im:
        size = (EMBED_MAX_PX, max(1, round(h * EMBED_MAX_PX / w)))
        small = im.resize(size, Image.Resampling.LANCZOS)
    buf = io.BytesIO()
    small.save(buf, format="PNG")
    return buf.getvalue(), size[0], size[1]


def _figure_ref(stem: str, formats: Mapping[str, bytes], *, alt: str, caption: str, dpi: float = 300.0,
                size: str | None = None) -> FigureRef | None:
    """Embed one figure: its SVG when that is smaller than the PNG (vector, sharp in print), else the PNG."""
    png, svg = formats.get("png"), formats.get("svg")
    inches = 0.0
    if svg and (not png or len(svg) < len(png)):
        w, h = _svg_size(svg)
        mime, data, inches = "image/svg+xml", svg, w / 96
    elif png:
        w0, _ = _png_size(png)
        data, w, h = _embeddable_png(png)
        mime, inches = "image/png", w0 / dpi
    else:
        return None
    if size is None:
        size = "wide" if inches > 9 else "normal"  # wider than ~9 inches as drawn
    src = f"data:{mime};base64,{base64.b64encode(data).decode('ascii')}"
    return FigureRef(stem, src, alt, caption, int(round(w)), int(round(h)), size)


# --------------------------------------------------------------------------------------------------
# sections
# --------------------------------------------------------------------------------------------------
def _interval_label(r: _Run) -> str:
    level = _float(r.param("combine", "interval", math.nan))
    return f"{100 * level:.0f}% interval" if not math.isnan(level) else "interval"


def _tier_rule(r: _Run) -> str:
    rule = r.param("combine", "tier_rule")
    if rule == "quantile":
        q = [float(x) for x in r.param("combine", "tier_quantiles", ())]
        if len(q) == 3:
            shares = [1 - q[0], q[0] - q[1], q[1] - q[2], q[2]]
            return ("Tiers are relative: they cut the combined scores of the assessed taxa at the "
                    f"{100 * q[0]:.0f}th, {100 * q[1]:.0f}th and {100 * q[2]:.0f}th percentiles, so roughly the top "
                    f"{100 * shares[0]:.0f}% fall in “highest”, the next {100 * shares[1]:.0f}% in “high”, the next "
                    f"{100 * shares[2]:.0f}% in “moderate” and the rest in “lower”, whatever the absolute scores.")
    if rule == "threshold":
        t = [float(x) for x in r.param("combine", "tier_thresholds", ())]
        if len(t) == 3:
            return (f"Tiers cut the combined score at {t[0]:g}, {t[1]:g} and {t[2]:g}: “highest” at or above "
                    f"{t[0]:g}, “high” from {t[1]:g}, “moderate” from {t[2]:g}, “lower” below that.")
    return "Tiers group taxa by their combined score, from “highest” to “lower”."


def _risk_cells(r: _Run, row: Mapping[str, Any], ilabel: str) -> list[Cell]:
    """Rank, taxon, tier, combined, interval, analog, trajectory, evidence."""
    tier = _tier(row.get("tier"))
    p, lo, hi = _float(row.get("combined_p")), _float(row.get("combined_low")), _float(row.get("combined_high"))
    bar = None if any(math.isnan(v) for v in (p, lo, hi)) else tuple(min(max(v, 0.0), 1.0) for v in (lo, p, hi))
    taxon = r.taxon(row.get("taxon_id"), row.get("scientificName"))
    evidence = _text(row.get("evidence"))
    return [
        Cell(fmt_int(row.get("combined_rank")), sort_key(row.get("combined_rank")), "num"),
        Cell(taxon.name, taxon.name.lower(), "taxon", taxon=taxon),
        Cell(tier.name, str(tier.order), "tier", tier=tier),
        Cell(fmt_p(p), sort_key(p), "num"),
        Cell(fmt_prange(lo, hi), sort_key(lo), "interval", title=f"{ilabel}: {fmt_prange(lo, hi)}", bar=bar),
        Cell(fmt_p(row.get("analog_p")), sort_key(row.get("analog_p")), "num"),
        Cell(fmt_p(row.get("trajectory_p")), sort_key(row.get("trajectory_p")), "num"),
        Cell(evidence or MISSING, evidence),
    ]


def _risk_columns(ilabel: str) -> list[Column]:
    return [
        Column("Rank", True, "Position in the combined ranking (1 = most vulnerable)"),
        Column("Taxon"),
        Column("Tier", True, "Relative vulnerability tier"),
        Column("Combined score", True, "Combined relative vulnerability, 0 to 1"),
        Column(ilabel.capitalize(), True, "Uncertainty of the combined score; sorts by its lower end"),
        Column("Analog score", True, "How taxa like this fared in past warming intervals"),
        Column("Trajectory score", True, "From the lineage's own occupancy history"),
        Column("Evidence", False, "Which lines of evidence the score rests on"),
    ]


def _ordered_rankings(rankings: pd.DataFrame) -> pd.DataFrame:
    if "combined_rank" in rankings.columns:
        order = pd.to_numeric(rankings["combined_rank"], errors="coerce")
        return rankings.assign(_order=order).sort_values("_order", na_position="last", kind="mergesort")
    return rankings


class _RiskRows:
    """The risk-table cells of the rows of the rankings, in combined-rank order, each rendered once
    (when first shown) and reused.

    The study-wide table and every region's tables show the same cells for a taxon (ranks, tiers
    and scores are those of the whole study).
    """

    def __init__(self, r: _Run, rankings: pd.DataFrame):
        self.r = r
        self.ilabel = _interval_label(r)
        self.columns = _risk_columns(self.ilabel)
        self.ordered = _ordered_rankings(rankings)
        self.records = self.ordered.to_dict("records")
        # has a tier (rows without one are left out of the top tables)
        self.assessed = [_tier(row.get("tier")) is not NOT_ASSESSED for row in self.records]
        self._cells: list[list[str] | None] = [None] * len(self.records)
        self._joined: list[str | None] = [None] * len(self.records)

    def __len__(self) -> int:
        return len(self.records)

    def cells(self, i: int) -> list[str]:
        """The <td> markup of each column of row ``i``, each followed by a blank line."""
        cells = self._cells[i]
        if cells is None:
            cells = self._cells[i] = [_cell_html(c) + "\n" for c in _risk_cells(self.r, self.records[i], self.ilabel)]
        return cells

    def row(self, i: int) -> str:
        """Every cell of row ``i``."""
        joined = self._joined[i]
        if joined is None:
            joined = self._joined[i] = "".join(self.cells(i))
        return joined

    def table(self, *, table_id: str, caption: str, limit: int, note: str = "") -> Table:
        """The first ``limit`` rows as a sortable table."""
        rows = [self.row(i) for i in range(min(limit, len(self)))]
        return Table(table_id, caption, list(self.columns), rows, sorted_by=0, sorted_dir="ascending", note=note)


MAX_RANKING_ROWS = 2000  # rows of the study-wide ranked table in briefing.html; rankings.csv has every taxon
TOC_REGION_LIMIT = 40    # regions listed one by one in the contents; beyond, the regions table leads to them
MAX_REGION_ROWS = 250    # rows of a region page's table of taxa; region_taxa.csv has every taxon recorded
TOP_REGION_ROWS = 10     # most vulnerable taxa per region in briefing.html


def _ranking_table(r: _Run, risk: _RiskRows) -> Table:
    n = len(risk)
    if n <= MAX_RANKING_ROWS:
        return risk.table(table_id="ranking", caption="All living taxa in the study, by combined relative "
                                                      "vulnerability", limit=n)
    return risk.table(table_id="ranking", limit=MAX_RANKING_ROWS,
                      caption=f"The {MAX_RANKING_ROWS:,} most vulnerable of the {n:,} living taxa in the study, by "
                              "combined relative vulnerability",
                      note=f"Only the first {MAX_RANKING_ROWS:,} taxa in combined-rank order are shown, and sorting "
                           "reorders these rows only. rankings.csv in the same output folder lists all "
                           f"{n:,} taxa with every score.")


def _rankings(r: _Run) -> pd.DataFrame | None:
    return r.table("combined", "rankings.csv")


def _has_evidence(rankings: pd.DataFrame) -> np.ndarray:
    """Rows resting on at least one line of evidence (all rows when the column is absent)."""
    if "evidence" in rankings.columns:
        return (rankings["evidence"].astype(str) != "none").to_numpy()
    return np.ones(len(rankings), dtype=bool)


def _assessed(rankings: pd.DataFrame) -> pd.DataFrame:
    return rankings[_has_evidence(rankings)]


def _comparison_stat(r: _Run, name: str) -> dict | None:
    comp = r.table("combined", "comparison.csv")
    if comp is None or "statistic" not in comp.columns:
        return None
    hit = comp[comp["statistic"].astype(str) == name]
    if not len(hit):
        return None
    row = hit.iloc[0]
    est = _float(row.get("estimate"))
    if math.isnan(est):
        return None
    return {"estimate": est, "low": _float(row.get("low")), "high": _float(row.get("high")),
            "note": _text(row.get("note"))}


def _agreement_words(tau: dict | None, rho: dict | None) -> dict:
    """Plain-words reading of the rank agreement (rule-of-thumb bands on |tau-b|, common practice)."""
    if tau is None and rho is None:
        return {"available": False}
    main = tau or rho
    est = main["estimate"]
    size = abs(est)
    if size < 0.1:
        strength = "hardly at all"
    elif size < 0.3:
        strength = "weakly"
    elif size < 0.5:
        strength = "moderately"
    else:
        strength = "strongly"
    direction = "agree" if est >= 0 else "run in opposite directions"
    lo, hi = main["low"], main["high"]
    name = "tau-b" if tau is not None else "rho"
    if math.isnan(lo) or math.isnan(hi):
        certainty = f"No interval could be computed for {name}."
    elif lo <= 0 <= hi:
        certainty = (f"The interval of {name} includes zero, so on these data the agreement cannot be told apart "
                     "from chance.")
    else:
        certainty = (f"The interval of {name} excludes zero: the {'agreement' if est > 0 else 'disagreement'} is "
                     "more than chance would give.")
    if est >= 0 and size < 0.1:
        headline = "The two lines of evidence hardly agree at all"
    elif est >= 0:
        headline = f"The two lines of evidence {strength} agree"
    else:
        headline = f"The two lines of evidence {direction} ({strength})"
    return {"available": True, "headline": headline, "certainty": certainty,
            "tau": tau, "rho": rho}


_TOPK = re.compile(r"top[_ -]?(\d+)", re.IGNORECASE)


def _topk_rows(r: _Run) -> list[dict]:
    """Top-k overlaps as 'k', share and interval (shares of the k most vulnerable on each line)."""
    comp = r.table("combined", "comparison.csv")
    if comp is None or "statistic" not in comp.columns:
        return []
    out = []
    for row in comp.to_dict("records"):
        hit = _TOPK.match(str(row.get("statistic")))
        if hit:
            lo, hi = _float(row.get("low")), _float(row.get("high"))
            span = "" if math.isnan(lo) or math.isnan(hi) else f"{fmt_pct(lo)} to {fmt_pct(hi)}"
            out.append({"k": int(hit.group(1)), "share": fmt_pct(row.get("estimate")), "range": span})
    return sorted(out, key=lambda t: t["k"])


_STAT_LABELS = {"kendall_tau_b": "Kendall's tau-b", "spearman_rho": "Spearman's rho",
                "n_taxa_both_lines": "Taxa with both lines"}


def _comparison_table(r: _Run) -> Table:
    comp = r.table("combined", "comparison.csv")
    rows = []
    if comp is not None and "statistic" in comp.columns:
        for row in comp.to_dict("records"):
            stat = str(row.get("statistic"))
            est = row.get("estimate")
            rows.append([
                Cell(_STAT_LABELS.get(stat, _pretty(stat).capitalize())),
                Cell(fmt_count(est) if stat.startswith("n_") else fmt_num(est), sort_key(est), "num"),
                Cell(fmt_range(row.get("low"), row.get("high")), sort_key(row.get("low")), "num"),
                Cell(_text(row.get("note"))),
            ])
    return Table("comparison", "How far the analog and trajectory rankings agree",
                 [Column("Statistic"), Column("Estimate", True), Column("Interval", True), Column("Note")],
                 rows, sortable=False)


def _skill_line(r: _Run) -> dict:
    analog = _float(getattr(getattr(r.run, "analog", None), "skill", math.nan))
    traj = _float(getattr(getattr(r.run, "trajectory", None), "skill", math.nan))
    combined = getattr(r.run, "combined", None)
    weights = getattr(combined, "weights", None) or {}
    skill = getattr(combined, "skill", None) or {}
    if math.isnan(analog):
        analog = _float(skill.get("analog"))
    if math.isnan(traj):
        traj = _float(skill.get("trajectory"))
    source = {"skill": "set from each line's measured skill",
              "user": "set in study.toml",
              "single line": "only one line of evidence was available"}.get(str(weights.get("source")),
                                                                           _text(weights.get("source")))
    if math.isnan(analog) or math.isnan(traj):
        verdict = ""
    elif abs(analog - traj) < 0.02:
        verdict = "On these checks the two lines predicted about equally well."
    else:
        better, worse = ("analog", "trajectory") if analog > traj else ("trajectory", "analog")
        verdict = (f"On these checks the {better} line predicted better than the {worse} line. The two checks are "
                   "not the same test (held-out warming intervals against truncated histories), so read this as a "
                   "rough guide.")
    return {"analog": analog, "trajectory": traj, "verdict": verdict,
            "has_weights": not math.isnan(_float(weights.get("analog"))),
            "w_analog": _float(weights.get("analog")), "w_trajectory": _float(weights.get("trajectory")),
            "source": source}


def _summary(r: _Run, rankings: pd.DataFrame | None, regions: list[RegionView]) -> dict:
    out: dict[str, Any] = {"ranked": rankings is not None}
    if rankings is not None:
        assessed = _assessed(rankings)
        ev = rankings["evidence"].astype(str).value_counts() if "evidence" in rankings.columns else pd.Series(dtype=int)
        out["n_taxa"] = len(rankings)
        out["shown"] = min(len(rankings), MAX_RANKING_ROWS)  # rows of the ranked table
        out["n_assessed"] = len(assessed)
        out["n_both"] = int(ev.get("both", 0))
        out["n_analog_only"] = int(ev.get("analog only", 0))
        out["n_trajectory_only"] = int(ev.get("trajectory only", 0))
        out["n_none"] = int(ev.get("none", 0))
        tiers = assessed["tier"].astype(str).value_counts() if "tier" in assessed.columns else pd.Series(dtype=int)
        out["tier_counts"] = [(TIERS[n], int(tiers.get(n, 0))) for n in TIER_NAMES]
        top = _ordered_rankings(assessed).head(5)
        lows = pd.to_numeric(top["combined_low"], errors="coerce") if "combined_low" in top.columns else None
        highs = pd.to_numeric(top["combined_high"], errors="coerce") if "combined_high" in top.columns else None
        # the first taxon's interval reaching below the last one's upper end: their order is not firm
        out["top_overlap"] = bool(lows is not None and len(top) > 1 and lows.iloc[0] < highs.iloc[-1])
        out["top"] = [{"taxon": r.taxon(row.get("taxon_id"), row.get("scientificName")),
                       "p": fmt_p(row.get("combined_p")),
                       "range": fmt_prange(row.get("combined_low"), row.get("combined_high")),
                       "tier": _tier(row.get("tier"))} for row in top.to_dict("records")]
    ok = [g for g in regions if not g.flagged]
    out["n_regions"] = len(regions)
    out["flagged_regions"] = [g for g in regions if g.flagged]
    summary = r.table("regions", "region_summary.csv")
    top_regions = []
    if summary is not None and "expected_losses" in summary.columns and ok:
        by_id = {str(row["region_id"]): row for row in summary.to_dict("records")}
        ranked = sorted(ok, key=lambda g: (-_nan_low(by_id.get(g.region_id, {}).get("expected_losses")), g.name))
        for g in ranked[:3]:
            row = by_id.get(g.region_id, {})
            top_regions.append({"region": g, "losses": fmt_num(row.get("expected_losses"), 1),
                                "range": fmt_range(row.get("expected_losses_low"), row.get("expected_losses_high"), 1),
                                "n_taxa": fmt_int(row.get("n_taxa")), "mean": fmt_num(row.get("mean_combined_p"))})
    out["top_regions"] = top_regions
    out["agreement"] = _agreement_words(_comparison_stat(r, "kendall_tau_b"), _comparison_stat(r, "spearman_rho"))
    out["topk"] = _topk_rows(r)
    out["skill"] = _skill_line(r)
    out["hindcast"] = _hindcast_words(r)
    return out


def _nan_low(x: Any) -> float:
    v = _float(x)
    return -math.inf if math.isnan(v) else v


# -- regions -----------------------------------------------------------------------------------------
_LINE_INDICES = [("n_taxa", "Taxa assessed", fmt_int),
                 ("expected_losses", "Expected losses", lambda v: fmt_num(v, 1)),
                 ("mean_p", "Mean score", fmt_p), ("mean_combined_p", "Mean score", fmt_p),
                 ("n_top_tier", "Taxa in the highest tier", fmt_int)]
_LOSSES_WHY = ("sum of the combined scores of the taxa assessed here; a way to compare regions, not a count of "
               "taxa that will disappear")


def _region_indices(row: Mapping[str, Any]) -> list[tuple[str, str, str]]:
    """(label, value, explanation) for each region index the summary table has."""
    out = []
    if "n_taxa_present" in row:
        out.append(("Living taxa recorded here", fmt_int(row.get("n_taxa_present")),
                    "taxa of the study with modern records in this region"))
    if "n_taxa" in row:
        out.append(("Taxa assessed", fmt_int(row.get("n_taxa")),
                    "recorded here and scored on at least one line of evidence"))
    if "n_records" in row:
        out.append(("Modern occurrence records", fmt_int(row.get("n_records")), "records assigned to this region"))
    if "expected_losses" in row:
        value = fmt_num(row.get("expected_losses"), 1)
        span = fmt_range(row.get("expected_losses_low"), row.get("expected_losses_high"), 1)
        out.append(("Expected losses (sum of scores)", f"{value} ({span})" if span != MISSING else value,
                    _LOSSES_WHY))
    if "mean_combined_p" in row:
        out.append(("Mean combined score", fmt_p(row.get("mean_combined_p")),
                    "average relative vulnerability of the taxa assessed here"))
    if "n_top_tier" in row:
        out.append(("Taxa in the highest tier", fmt_int(row.get("n_top_tier")),
                    "assessed here and in the highest tier of the whole study"))
    if "diversity_loss" in row:
        value = fmt_num(row.get("diversity_loss"), 1)
        if not math.isnan(_float(row.get("diversity_total"))):
            value = f"{value} of {fmt_count(row.get('diversity_total'))} branches"
        span = fmt_range(row.get("diversity_loss_low"), row.get("diversity_loss_high"), 1)
        out.append(("Expected loss of taxonomic diversity", f"{value} ({span})" if span != MISSING else value,
                    "expected number of branches of the rank tree spanned by the taxa assessed here that would "
                    "be lost, one unit per rank level (after Faith 2008)"))
    if "mean_difference" in row and not math.isnan(_float(row.get("mean_difference"))):
        n = fmt_int(row.get("n_taxa_both")) if "n_taxa_both" in row else "the"
        out.append(("Analog minus trajectory score (mean)", fmt_num(row.get("mean_difference")),
                    f"over {n} taxa scored on both lines; positive: the analog evidence rates them as more "
                    "vulnerable than their own histories do"))
    if "area_km2" in row and not math.isnan(_float(row.get("area_km2"))):
        out.append(("Area", f"{fmt_int(row.get('area_km2'))} km²", "equal-area projection"))
    return out


def _region_inset(r: _Run, region_id: str, name: str) -> FigureRef | None:
    try:
        maps = importlib.import_module("analog.figures.maps")
    except ModuleNotFoundError:
        return None
    fn = getattr(maps, "region_inset", None)
    if fn is None:
        return None
    from ..output import render_figure
    import matplotlib.pyplot as plt

    accepted = inspect.signature(fn).parameters
    options = {}
    if "context" in accepted:
        options["context"] = getattr(r.study, "context", None)
    if "params" in accepted and r.params("figures") is not None:
        options["params"] = r.params("figures")
    try:
        fig = fn(region_id, r.run.regions, **options)
    except Exception as exc:  # noqa: BLE001 - one bad inset must not stop the briefing
        warnings.warn(f"briefing: the map inset of region {region_id!r} could not be drawn ({type(exc).__name__}: "
                      f"{exc}); the page says so instead", AnalogWarning, stacklevel=2)
        return None
    if fig is None:
        return None
    try:
        png = render_figure(fig, "png", dpi=INSET_DPI)
    finally:
        plt.close(fig)
    return _figure_ref(f"inset_{region_id}", {"png": png},
                       alt=f"Map of {name} within the study area, shaded by combined relative vulnerability.",
                       caption=f"{name} (outlined) within the study area.", size="inset")


def _present_rows(presence: pd.DataFrame | None) -> pd.DataFrame | None:
    if presence is None or "present" not in presence.columns:
        return presence
    flag = presence["present"]
    if flag.dtype == bool:
        return presence[flag.to_numpy()]
    return presence[flag.map(lambda v: str(v).strip().lower() in {"true", "1", "yes"}).to_numpy(dtype=bool)]


def _region_slices(presence: pd.DataFrame, risk: _RiskRows) -> dict[str, tuple[np.ndarray, np.ndarray]] | None:
    """region_id -> (rows of ``risk`` recorded there, in combined-rank order; records of each);
    None when the tables lack the id columns.

    One join of the (region, taxon) pairs to the rankings and one sort, instead of filtering
    the whole presence table and the rankings once per region.
    """
    ordered = risk.ordered
    if "region_id" not in presence.columns or "taxon_id" not in presence.columns or "taxon_id" not in ordered:
        return None
    pairs = pd.DataFrame({"region_id": presence["region_id"].astype(str).to_numpy(dtype=object),
                          "taxon_id": presence["taxon_id"].astype(str).to_numpy(dtype=object)})
    if "n_records" in presence.columns:
        pairs["n"] = presence["n_records"].to_numpy()
        counts = pairs.groupby(["region_id", "taxon_id"], sort=False)["n"].sum()
    else:
        counts = pairs.groupby(["region_id", "taxon_id"], sort=False).size()
    counts = counts.rename("n").reset_index()
    rows = pd.DataFrame({"taxon_id": ordered["taxon_id"].astype(str).to_numpy(dtype=object),
                         "row": np.arange(len(ordered))})
    hits = counts.merge(rows, on="taxon_id", how="inner").sort_values(["region_id", "row"], kind="mergesort")
    out = {}
    region = hits["region_id"].to_numpy()
    row = hits["row"].to_numpy()
    n = hits["n"].to_numpy()
    starts = np.flatnonzero(np.r_[True, region[1:] != region[:-1]]) if len(region) else np.zeros(0, dtype=int)
    for a, b in zip(starts, np.r_[starts[1:], len(region)]):
        out[region[a]] = (row[a:b], n[a:b])
    return out


@functools.lru_cache(maxsize=4096)
def _count_cell(v: int) -> str:
    return _cell_html(Cell(fmt_int(v), sort_key(v), "num")) + "\n"


def _records_cell(v: Any) -> str:
    """The 'Records here' cell (record counts repeat: whole numbers are rendered once each)."""
    if type(v) is int:
        return _count_cell(v)
    return _cell_html(Cell(fmt_int(v), sort_key(v), "num")) + "\n"


def _region_tables(risk: _RiskRows, rows: np.ndarray, records: np.ndarray, *, slug: str,
                   name: str) -> tuple[Table, Table]:
    """The region page's table of taxa recorded there and the briefing's table of the most vulnerable."""
    columns = list(risk.columns) + [Column("Records here", True)]
    n = len(rows)
    shown = min(n, MAX_REGION_ROWS)
    present_rows = [risk.row(i) + _records_cell(v) for i, v in zip(rows[:shown].tolist(), records[:shown].tolist())]
    if n > shown:
        caption = (f"The {shown:,} most vulnerable of the {n:,} living taxa recorded in {name}, in combined-rank "
                   "order")
        note = (f"Only the first {shown:,} taxa in combined-rank order are shown, and sorting reorders these rows "
                "only. region_taxa.csv in the output folder lists every taxon recorded in each region.")
    else:
        caption, note = f"Living taxa recorded in {name}, in combined-rank order", ""
    present = Table(f"taxa-{slug}", caption, columns, present_rows, sorted_by=0, sorted_dir="ascending", note=note)
    keep = [0, 1, 2, 3, 4, 7]  # rank, taxon, tier, combined, interval, evidence (then records here)
    top_rows = []
    for i, v in zip(rows.tolist(), records.tolist()):
        if len(top_rows) == TOP_REGION_ROWS:
            break
        if risk.assessed[i]:
            cells = risk.cells(i)
            top_rows.append("".join(cells[k] for k in keep) + _records_cell(v))
    top = Table(f"top-{slug}", f"Most vulnerable taxa recorded in {name} (first {len(top_rows)})",
                [columns[k] for k in keep + [8]], top_rows, sortable=False)
    return present, top


def _natural_key(text: str) -> tuple:
    """Sort key that orders "District 2" before "District 10" (case-insensitive)."""
    parts = re.split(r"(\d+)", text.lower())
    return tuple((0, int(t), "") if t.isdigit() else (1, 0, t) for t in parts)


def _regions(r: _Run, risk: _RiskRows | None, *, draw_insets: bool) -> list[RegionView]:
    summary = r.table("regions", "region_summary.csv")
    if summary is None or "region_id" not in summary.columns:
        return []
    presence = _present_rows(r.table("regions", "region_taxa.csv"))
    slices = _region_slices(presence, risk) if risk is not None and presence is not None else None
    assessed = _has_evidence(risk.ordered) if risk is not None else None
    taken: set[str] = set()
    views = []
    rows = summary.to_dict("records")
    rows.sort(key=lambda row: (_natural_key(_text(row.get("name"), str(row["region_id"]))),
                               _natural_key(str(row["region_id"]))))
    empty = (np.zeros(0, dtype=np.int64), np.zeros(0))
    for row in rows:
        rid = str(row["region_id"])
        name = _text(row.get("name")) or rid
        slug = region_page_name(rid, taken)
        flagged = _flagged(row.get("data_flag"))
        flag = "; ".join(t for t in (_text(row.get("data_flag")), _text(row.get("flag_reason"))) if t)
        indices = _region_indices(row)
        by_line = []
        seen = set()
        for suffix, label, f in _LINE_INDICES:
            a, t = row.get(f"analog_{suffix}"), row.get(f"trajectory_{suffix}")
            if (f"analog_{suffix}" in row or f"trajectory_{suffix}" in row) and label not in seen:
                seen.add(label)
                by_line.append((label, f(a), f(t)))
        if slices is not None:
            here, records = slices.get(rid, empty)
            present, top = _region_tables(risk, here, records, slug=slug, name=name)
            n_present, n_assessed = len(here), int(assessed[here].sum())
        else:
            present = Table(f"taxa-{slug}", f"Living taxa recorded in {name}", [], [])
            top = Table(f"top-{slug}", f"Most vulnerable taxa recorded in {name}", [], [], sortable=False)
            n_present = n_assessed = 0
        inset = _region_inset(r, rid, name) if draw_insets else None
        views.append(RegionView(rid, slug, name, flagged, flag, indices, by_line, top, present, inset,
                                n_present, n_assessed, n_shown=len(present.rows)))
    _standing(views, rows)
    return views


def _ordinal(n: int) -> str:
    suffix = "th" if 10 <= n % 100 <= 20 else {1: "st", 2: "nd", 3: "rd"}.get(n % 10, "th")
    return f"{n}{suffix}"


def _standing(views: list[RegionView], rows: list[dict]) -> None:
    """'ranks 3rd of 11 by expected losses and 5th by mean score', among regions with enough data."""
    ok = {str(row["region_id"]): row for row in rows if not _flagged(row.get("data_flag"))}
    places = {}
    for col in ("expected_losses", "mean_combined_p"):
        values = sorted((-_float(row.get(col)), rid) for rid, row in ok.items() if not math.isnan(_float(row.get(col))))
        places[col] = {rid: i + 1 for i, (_, rid) in enumerate(values)}
    n = len(ok)
    for v in views:
        a, b = places["expected_losses"].get(v.region_id), places["mean_combined_p"].get(v.region_id)
        if v.flagged or n < 2 or a is None:
            continue
        text = f"Among the {n} regions with enough data, {v.name} ranks {_ordinal(a)} by expected losses"
        text += f" and {_ordinal(b)} by mean score" if b is not None else ""
        v.standing = text + " (1st = most vulnerable)."


def _region_overview(r: _Run, regions: list[RegionView]) -> Table:
    summary = r.table("regions", "region_summary.csv")
    rows = []
    if summary is not None:
        by_id = {str(row["region_id"]): row for row in summary.to_dict("records")}
        for g in regions:
            row = by_id[g.region_id]
            rows.append([
                Cell(g.name, g.name.lower(), "link", href=f"#region-{g.slug}"),
                Cell(fmt_int(row.get("n_taxa")), sort_key(row.get("n_taxa")), "num"),
                Cell(fmt_int(row.get("n_records")), sort_key(row.get("n_records")), "num"),
                Cell(fmt_num(row.get("expected_losses"), 1), sort_key(row.get("expected_losses")), "num"),
                Cell(fmt_range(row.get("expected_losses_low"), row.get("expected_losses_high"), 1),
                     sort_key(row.get("expected_losses_low")), "num"),
                Cell(fmt_num(row.get("mean_combined_p")), sort_key(row.get("mean_combined_p")), "num"),
                Cell(fmt_int(row.get("n_top_tier")), sort_key(row.get("n_top_tier")), "num"),
                Cell(g.flag if g.flagged else "enough data", "1" if g.flagged else "0",
                     "flag" if g.flagged else "text"),
            ])
    cols = [Column("Region"), Column("Taxa", True), Column("Records", True),
            Column("Expected losses", True, "Sum of combined scores of the taxa present"),
            Column("Interval", True, "Sorts by its lower end"),
            Column("Mean score", True), Column("Highest tier", True, "Taxa present in the highest tier"),
            Column("Data", False, "Whether the region has enough records to judge")]
    return Table("regions-overview", "Regions at a glance", cols, rows)


# -- analog --------------------------------------------------------------------------------------
def _trait_label(r: _Run, term: str, *, short: bool = False) -> str:
    """'depth_zone[T.slope]'-like terms in the trait's display name, where the trait is known."""
    traits = getattr(r.config, "traits", {}) or {}
    for name in sorted(traits, key=len, reverse=True):
        if term.startswith(name):
            rest = term[len(name):].strip("[]:=._ ")
            rest = re.sub(r"^T\.", "", rest).strip("[]")
            spec = traits[name]
            label = spec.display
            label = label[:1].upper() + label[1:]
            if rest:
                return f"{label}: {rest}"
            if short:
                return label
            return label + {"numeric": " (per standard deviation)", "binary": " (yes vs no)",
                            "ordinal": " (per step up its ordered classes)"}.get(spec.kind, "")
    return _pretty(term)


_INTERCEPTS = {"intercept", "(intercept)", "const", "constant"}


def _trait_of(r: _Run, term: str):
    traits = getattr(r.config, "traits", {}) or {}
    for name in sorted(traits, key=len, reverse=True):
        if term.startswith(name):
            return traits[name]
    return None


def _trait_kind(r: _Run, term: str) -> str:
    spec = _trait_of(r, term)
    return spec.kind if spec is not None else ""


def _reference_class(r: _Run, term: str) -> str:
    spec = _trait_of(r, term)
    if spec is None or spec.kind != "categorical":
        return ""
    return _text(spec.reference)


def _pooling(r: _Run) -> dict:
    pooled = r.table("analog", "pooling.csv")
    if pooled is None:
        return {"table": None, "clear_terms": [], "unclear_terms": []}
    rows, clear, unclear = [], [], []
    for row in pooled.to_dict("records"):
        raw = _text(row.get("term"))
        if raw.strip().lower() in _INTERCEPTS:
            continue  # the baseline odds, not a trait effect
        est, lo, hi = _float(row.get("estimate")), _float(row.get("ci_low")), _float(row.get("ci_high"))
        orr, olo, ohi = (math.exp(v) if not math.isnan(v) else math.nan for v in (est, lo, hi))
        term = _trait_label(r, raw)
        i2 = _float(row.get("i2"))
        i2 = i2 / 100 if i2 > 1 else i2  # accept I² as a share or a percentage
        rows.append([
            Cell(term, term.lower()),
            Cell(fmt_ratio(orr), sort_key(orr), "num"),
            Cell(fmt_range(olo, ohi, fmt=fmt_ratio), sort_key(olo), "num"),
            Cell(fmt_num(est), sort_key(est), "num"),
            Cell(fmt_num(row.get("tau2"), 3), sort_key(row.get("tau2")), "num"),
            Cell(fmt_pct(i2), sort_key(i2), "num"),
            Cell(fmt_num(row.get("q")), sort_key(row.get("q")), "num"),
            Cell(fmt_num(row.get("q_p"), 3), sort_key(row.get("q_p")), "num"),
            Cell(fmt_int(row.get("k")), sort_key(row.get("k")), "num"),
            Cell(_text(row.get("method"))),
        ])
        if not (math.isnan(lo) or math.isnan(hi)):
            ref = _reference_class(r, raw)
            item = {"term": term, "or": fmt_ratio(orr), "range": fmt_range(olo, ohi, fmt=fmt_ratio),
                    "against": f"than the reference class ({ref})" if ref else "than the reference class"}
            if not ref and _trait_kind(r, raw) in {"numeric", "ordinal"}:
                item["against"] = "as the trait increases"
            if lo > 0:
                clear.append({**item, "direction": "more often lost"})
            elif hi < 0:
                clear.append({**item, "direction": "less often lost"})
            else:
                unclear.append(item)
    methods = sorted({_text(row.get("method")) for row in pooled.to_dict("records")} - {""})
    if len(methods) <= 1:  # one method for every row: say it once, under the table
        for cells in rows:
            cells.pop()
    cols = [Column("Trait class"), Column("Pooled odds ratio", True, "Odds of loss against the reference class"),
            Column("Interval", True, "Confidence interval of the odds ratio; sorts by its lower end"),
            Column("Log odds", True), Column("tau²", True, "Between-interval variance of the log odds ratio"),
            Column("I²", True, "Share of the spread due to real differences between intervals"),
            Column("Q", True, "Cochran's heterogeneity statistic"), Column("p (Q)", True),
            Column("Intervals", True, "Number of warming intervals pooled"), Column("Method")]
    note = ""
    if len(methods) <= 1:
        cols.pop()
        note = f"Method: {methods[0]}." if methods else ""
    table = Table("pooled", "Pooled odds ratios of loss across warming intervals", cols, rows, note=note)
    return {"table": table, "clear_terms": clear, "unclear_terms": unclear}


def _interval_names(r: _Run) -> dict[str, str]:
    iv = getattr(r.study, "intervals", None)
    if isinstance(iv, pd.DataFrame) and {"interval_id", "name"} <= set(iv.columns):
        return {str(a): _text(b) for a, b in zip(iv["interval_id"], iv["name"])}
    return {}


def _loo(r: _Run) -> Table | None:
    loo = r.table("analog", "leave_one_out.csv")
    if loo is None:
        return None
    names = _interval_names(r)
    rows = []
    for row in loo.to_dict("records"):
        iid = _text(row.get("interval_id"))
        label = names.get(iid) or iid
        rows.append([Cell(label, label.lower()),
                     Cell(fmt_num(row.get("auc")), sort_key(row.get("auc")), "num"),
                     Cell(fmt_count(row.get("n_at_risk")), sort_key(row.get("n_at_risk")), "num"),
                     Cell(fmt_count(row.get("n_lost")), sort_key(row.get("n_lost")), "num")])
    cols = [Column("Held-out interval"), Column("AUC", True, "0.5 = no better than chance, 1 = perfect"),
            Column("Taxa at risk", True, "Mean over age draws"), Column("Taxa lost", True, "Mean over age draws")]
    return Table("loo", "Leave-one-interval-out: how well the other intervals predict each one's losses", cols, rows)


def _interval_weights(r: _Run) -> Table | None:
    w = getattr(getattr(r.run, "analog", None), "interval_weights", None)
    if not isinstance(w, pd.DataFrame) or "interval_id" not in w.columns:
        return None
    names = _interval_names(r)
    rows = []
    for row in w.to_dict("records"):
        iid = _text(row.get("interval_id"))
        label = names.get(iid) or iid
        rows.append([Cell(label, label.lower()),
                     Cell(fmt_num(row.get("warming_c"), 1), sort_key(row.get("warming_c")), "num"),
                     Cell(fmt_num(row.get("weight"), 3), sort_key(row.get("weight")), "num")])
    cols = [Column("Warming interval"), Column("Estimated warming (°C)", True),
            Column("Weight", True, "Weight given to this interval for the scenario")]
    return Table("interval-weights", "How much each past interval counts for the scenario", cols, rows)


# -- trajectory -------------------------------------------------------------------------------------
_MODEL_LABELS = {"rise_and_fall": "rise-and-fall", "rise_fall": "rise-and-fall", "hat": "rise-and-fall",
                 "rise_fall_asymmetric": "asymmetric rise-and-fall",
                 "rise_and_fall_asymmetric": "asymmetric rise-and-fall",
                 "random_walk": "random walk", "rw": "random walk", "drift": "random walk with drift",
                 "random_walk_drift": "random walk with drift", "stasis": "stasis",
                 "model_average": "model average", "average": "model average",
                 "current_occupancy": "current occupancy (baseline)"}


def _model_label(name: Any) -> str:
    key = _text(name).strip()
    if key.lower() in _MODEL_LABELS:
        return _MODEL_LABELS[key.lower()]
    label = _pretty(key)
    return label.replace("rise and fall", "rise-and-fall").replace("rise fall", "rise-and-fall")


def _hindcast_rows(r: _Run) -> list[dict]:
    hc = r.table("trajectory", "hindcast.csv")
    if hc is None or "model" not in hc.columns:
        return []
    return [{"model": _model_label(row.get("model")), "raw": _text(row.get("model")),
             "reading": _text(row.get("reading")) or _model_label(row.get("model")),
             "auc": _float(row.get("auc")), "low": _float(row.get("auc_low")), "high": _float(row.get("auc_high")),
             "brier": _float(row.get("brier")), "n_lost": row.get("n_lost"), "n_survived": row.get("n_survived"),
             "scored": _text(row.get("what_is_scored"))}
            for row in hc.to_dict("records")]


def _hindcast_table(r: _Run) -> Table | None:
    rows = _hindcast_rows(r)
    if not rows:
        return None
    cells = [[Cell(h["reading"], h["reading"].lower()), Cell(fmt_num(h["auc"]), sort_key(h["auc"]), "num"),
              Cell(fmt_range(h["low"], h["high"]), sort_key(h["low"]), "num"),
              Cell(fmt_num(h["brier"], 3), sort_key(h["brier"]), "num"),
              Cell(fmt_int(h["n_lost"]), sort_key(h["n_lost"]), "num"),
              Cell(fmt_int(h["n_survived"]), sort_key(h["n_survived"]), "num")] for h in rows]
    cols = [Column("Reading (model)"), Column("AUC", True, "0.5 = no better than chance, 1 = perfect"),
            Column("Interval", True, "Bootstrap interval of the AUC"),
            Column("Brier score", True, "Mean squared error of the predicted probabilities; lower is better"),
            Column("Lost", True, "Taxa later lost, in the hindcast"), Column("Survived", True)]
    notes = sorted({h["scored"] for h in rows if h["scored"]})
    note = ("What was scored: " + " / ".join(notes) + ".") if len(notes) == 1 else ""
    return Table("hindcast", "Hindcast: each reading scored on truncated histories of taxa whose fate is known",
                 cols, cells, note=note)


def _overlap(a: dict, b: dict) -> bool:
    if any(math.isnan(v) for v in (a["low"], a["high"], b["low"], b["high"])):
        return True
    return a["low"] <= b["high"] and b["low"] <= a["high"]


def _auc_text(h: dict) -> str:
    return f"{fmt_num(h['auc'])} (interval {fmt_range(h['low'], h['high'])})"


def _hindcast_words(r: _Run) -> dict:
    """Which reading predicted better in the hindcast, in words."""
    rows = [h for h in _hindcast_rows(r) if not math.isnan(h["auc"])]
    if not rows:
        return {"available": False}
    hat = [h for h in rows if "rise" in h["model"]]
    walk = [h for h in rows if "walk" in h["model"]]
    base = [h for h in rows if h["raw"] == "current_occupancy"]
    best = max(rows, key=lambda h: h["auc"])
    out: dict[str, Any] = {"available": True, "best_text": f"{best['model']}, AUC {_auc_text(best)}",
                           "winner": None, "baseline": f"AUC {_auc_text(base[0])}" if base else "",
                           "chance": not math.isnan(best["low"]) and best["low"] <= 0.5}
    if hat and walk:
        h = max(hat, key=lambda x: x["auc"])
        w = max(walk, key=lambda x: x["auc"])
        winner, loser = (h, w) if h["auc"] >= w["auc"] else (w, h)
        out.update(winner=winner["model"], loser=loser["model"], winner_auc=_auc_text(winner),
                   loser_auc=_auc_text(loser), separated=not _overlap(h, w))
    return out


_NULL_STATS = {"peak_position": ("Peak position", "0 = at the start, 0.5 = in the middle, 1 = at the end"),
               "symmetry": ("Symmetry", "0 = symmetric; negative = bulk early, positive = bulk late"),
               "peakedness": ("Peakedness", "peak height over mean height; 2 for a tent shape, higher = sharper")}
_NULL_WORDS = {"peak_position": ("peak later than", "peak earlier than"),
               "symmetry": ("carry more of their history late than", "carry more of their history early than"),
               "peakedness": ("are more sharply peaked than", "are flatter than")}
_NULL_GROUPS = {"completed": "Finished histories",
                "ends_in_interval": "Histories ending in a catalogue warming interval"}
ALPHA = 0.05  # conventional significance level for the plain-words reading (common practice)


def _noise_null(r: _Run) -> dict:
    """Data-set-level comparison of finished histories with pinned noise, as a table and in words."""
    nn = r.table("trajectory", "noise_null.csv")
    empty = {"table": None, "n_taxa": 0, "groups": []}
    if nn is None:
        return empty
    level = nn["level"].astype(str).str.lower() if "level" in nn.columns else None
    if level is not None:
        ds, per_taxon = nn[level == "dataset"], nn[level != "dataset"]
    elif "taxon_id" in nn.columns:
        ds, per_taxon = nn[nn["taxon_id"].isna()], nn[nn["taxon_id"].notna()]
    else:
        return empty
    n_taxa = int(per_taxon["taxon_id"].nunique()) if "taxon_id" in per_taxon.columns else 0
    needed = {"statistic", "observed", "null_mean", "p_value"}
    if not len(ds) or not needed <= set(ds.columns):
        return {**empty, "n_taxa": n_taxa}
    rows, groups = [], []
    group_col = ds["group"] if "group" in ds.columns else pd.Series("", index=ds.index)
    for g in dict.fromkeys(group_col.astype(str)):
        part = ds[group_col.astype(str) == g]
        differs, same = [], []
        n = _float(part["n_taxa"].iloc[0]) if "n_taxa" in part.columns else math.nan
        for row in part.to_dict("records"):
            stat = _text(row.get("statistic"))
            label, meaning = _NULL_STATS.get(stat, (_pretty(stat).capitalize(), ""))
            obs, mean, pv = _float(row.get("observed")), _float(row.get("null_mean")), _float(row.get("p_value"))
            rows.append([
                Cell(_NULL_GROUPS.get(g, _pretty(g).capitalize()) if g else MISSING),
                Cell(label, title=meaning),
                Cell(fmt_num(obs), sort_key(obs), "num"),
                Cell(fmt_num(mean), sort_key(mean), "num"),
                Cell(fmt_range(row.get("null_low"), row.get("null_high")), sort_key(row.get("null_low")), "num"),
                Cell(fmt_pvalue(pv), sort_key(pv), "num"),
                Cell(fmt_pvalue(row.get("test_p_value")), sort_key(row.get("test_p_value")), "num"),
                Cell(fmt_count(row.get("n_taxa")), sort_key(row.get("n_taxa")), "num"),
            ])
            if math.isnan(pv) or math.isnan(obs) or math.isnan(mean):
                continue
            if pv < ALPHA:
                more, less = _NULL_WORDS.get(stat, ("score higher than", "score lower than"))
                differs.append(f"{more if obs > mean else less} pinned noise ({label.lower()} {fmt_num(obs)} "
                               f"against {fmt_num(mean)}, p {'<' if pv < 0.001 else '='} "
                               f"{fmt_pvalue(pv).lstrip('<')})")
            else:
                same.append(label.lower())
        verdict = ""
        peaked = part[part["statistic"].astype(str) == "peakedness"] if "statistic" in part.columns else part.iloc[0:0]
        if g in ("completed", "") and len(peaked):
            obs, mean, pv = (_float(peaked.iloc[0].get(c)) for c in ("observed", "null_mean", "p_value"))
            if not any(math.isnan(v) for v in (obs, mean, pv)):
                verdict = ("So finished histories here are more sharply hat-shaped than pinned noise would draw: "
                           "the hat is more than an artefact on these data." if pv < ALPHA and obs > mean else
                           "So finished histories here are no more hat-shaped than pinned noise would draw: on these "
                           "data a hat-shaped history is weak evidence on its own.")
        groups.append({"name": _NULL_GROUPS.get(g, _pretty(g).capitalize() if g else "All histories"),
                       "key": g, "n": fmt_count(n), "differs": differs, "same": same, "verdict": verdict})
    cols = [Column("Histories"), Column("Shape statistic"), Column("Observed (mean)", True),
            Column("Noise null (mean)", True), Column("Noise null interval", True),
            Column("p", True, "Observed mean against the null distribution of the mean"),
            Column("p (KS)", True, "Two-sample Kolmogorov–Smirnov test of the values against length-matched noise"),
            Column("Taxa", True)]
    table = Table("noise-null", "Shapes of finished histories against pinned noise (whole data set)", cols, rows,
                  sortable=False)
    return {"table": table, "n_taxa": n_taxa, "groups": groups}


def _unscored(r: _Run, stage: str, table: str, column: str) -> list[tuple[str, int]]:
    """Why taxa have no score on a line: (note, count) from the line's risk table."""
    t = r.table(stage, table)
    if t is None or column not in t.columns or "note" not in t.columns:
        return []
    missing = t[pd.to_numeric(t[column], errors="coerce").isna()]
    counts = missing["note"].fillna("no reason recorded").astype(str).value_counts()
    return sorted(((str(k), int(v)) for k, v in counts.items()), key=lambda kv: (-kv[1], kv[0]))


def _preferred_counts(r: _Run) -> list[tuple[str, int]]:
    tr = r.table("trajectory", "trajectory_risk.csv")
    if tr is None or "preferred_model" not in tr.columns:
        return []
    scored = tr if "trajectory_p" not in tr.columns else tr[pd.to_numeric(tr["trajectory_p"], errors="coerce").notna()]
    labels = scored["preferred_model"].map(lambda v: _model_label(v) if _text(v).strip() else "")
    counts = labels[labels != ""].value_counts()
    return sorted(((str(k), int(v)) for k, v in counts.items()), key=lambda kv: (-kv[1], kv[0]))


# -- disagreements ----------------------------------------------------------------------------------
_DRIVER = re.compile(r"^(?P<term>.*?)\s*\((?P<value>[-+\u2212]?[\d.]+)\)$")


def _drivers(r: _Run, text: Any) -> str:
    """'intercept (-2.30); depth_zone[basin] (-0.81)' -> 'Depth zone: basin −0.81'.

    The intercept is dropped: it is the same for every taxon, so it explains no difference.
    """
    out = []
    for part in (p.strip() for p in _text(text).split(";")):
        hit = _DRIVER.match(part)
        if not hit:
            if part:
                out.append(part)
            continue
        term = hit.group("term").strip()
        if term.lower() in _INTERCEPTS:
            continue
        out.append(f"{_trait_label(r, term, short=True)} {_minus(hit.group('value'))}")
    return "; ".join(out) or MISSING


def _disagreements(r: _Run) -> Table | None:
    d = r.table("combined", "disagreements.csv")
    if d is None:
        return None
    rows = []
    for row in d.to_dict("records"):
        taxon = r.taxon(row.get("taxon_id"), row.get("scientificName"))
        rows.append([
            Cell(taxon.name, taxon.name.lower(), "taxon", taxon=taxon),
            Cell(fmt_int(row.get("analog_rank")), sort_key(row.get("analog_rank")), "num"),
            Cell(fmt_int(row.get("trajectory_rank")), sort_key(row.get("trajectory_rank")), "num"),
            Cell(fmt_int(row.get("rank_difference")), sort_key(row.get("rank_difference")), "num"),
            Cell(_pretty(_text(row.get("higher_on"))) or MISSING),
            Cell(fmt_p(row.get("analog_p")), sort_key(row.get("analog_p")), "num"),
            Cell(fmt_p(row.get("trajectory_p")), sort_key(row.get("trajectory_p")), "num"),
            Cell(_drivers(r, row.get("analog_drivers"))),
            Cell(_model_label(row.get("preferred_model")) if _text(row.get("preferred_model"))
                 else _text(row.get("trajectory_driver")) or MISSING),
        ])
    cols = [Column("Taxon"), Column("Analog rank", True), Column("Trajectory rank", True),
            Column("Rank difference", True), Column("Ranked higher by"), Column("Analog score", True),
            Column("Trajectory score", True),
            Column("What pushes the analog score", False, "Trait terms on the log-odds scale; + raises, − lowers"),
            Column("Preferred trajectory reading")]
    return Table("disagreements", "Taxa whose two rankings differ most", cols, rows, sorted_by=None)


def _names(r: _Run, ids: Any) -> str:
    """'t1;t4' -> 'Alpha marina, Delta ...' (taxon ids listed in one cell, ';' or ',' separated)."""
    parts = [p.strip() for p in re.split(r"[;,]", _text(ids)) if p.strip()]
    return ", ".join(r.taxon(p).name for p in parts) or MISSING


def _sensitivity(r: _Run) -> dict:
    s = r.table("combined", "sensitivity.csv")
    if s is None or "jaccard_vs_default" not in s.columns or not len(s):
        return {"available": False}
    jac = pd.to_numeric(s["jaccard_vs_default"], errors="coerce")
    k = _float(s["k"].iloc[0]) if "k" in s.columns else math.nan
    lowest = s.loc[jac.idxmin()] if jac.notna().any() else None
    rows = [[Cell(fmt_num(row.get("analog_weight")), sort_key(row.get("analog_weight")), "num"),
             Cell(fmt_num(row.get("jaccard_vs_default")), sort_key(row.get("jaccard_vs_default")), "num"),
             Cell(fmt_int(row.get("n_shared")), sort_key(row.get("n_shared")), "num"),
             Cell(_names(r, row.get("entered"))), Cell(_names(r, row.get("left")))] for row in s.to_dict("records")]
    cols = [Column("Analog weight", True), Column("Overlap with default top set (Jaccard)", True),
            Column("Shared taxa", True), Column("Entered the top set"), Column("Left the top set")]
    return {"available": True, "k": fmt_int(k), "lowest": fmt_num(jac.min()),
            "at": fmt_num(lowest.get("analog_weight")) if lowest is not None else MISSING,
            "table": Table("sensitivity", "The top set as the weight given to the analog line moves from 0 to 1",
                           cols, rows, sortable=False)}


# -- methods and provenance --------------------------------------------------------------------------
def _methods(r: _Run) -> list[dict]:
    """The methods in plain words with their sources, stating the settings of this run where known."""
    warming = _float(getattr(r.config, "warming_c", math.nan))
    ilabel = _interval_label(r)

    def opt(section, name, fmt="{}", default=""):
        v = r.param(section, name)
        return default if v is None else fmt.format(v)

    draws = opt("analog", "age_draws", " ({} draws)")
    guards = []
    if r.param("analog", "drop_singletons") is True:
        guards.append("taxa known only from inside an interval's window are left out of it (they would all "
                      "count as lost)")
    if r.param("analog", "range_through") is True:
        guards.append("a taxon counts as present between its first and last occurrence (range-through)")
    pooling = {"REML": "restricted maximum likelihood (REML)", "DL": "the DerSimonian–Laird estimator"}.get(
        str(r.param("analog", "pooling_method")), "DerSimonian–Laird or REML")
    hksj = {"auto": "applied when fewer than five intervals inform a term", "on": "applied",
            "off": "not applied"}.get(str(r.param("analog", "hksj")), "available")
    scale = opt("analog", "weight_scale_c", "a Gaussian weight with a scale of {:g} °C")
    units = r.param("trajectory", "units")
    unit_text = (f"equal-area grid cells{opt('trajectory', 'cell_km', ' {:g} km across')}" if units == "grid" else
                 "localities" if units == "locality" else "grid cells or localities")
    width = _float(r.param("trajectory", "bin_width_ma"))
    bins = f"{width:g}-million-year bins" if not math.isnan(width) and r.param("trajectory", "bins") == "fixed" \
        else "time bins"
    horizon = _float(r.param("trajectory", "horizon_bins"))
    horizon_text = (f" within {horizon * width:g} million years" if not (math.isnan(horizon) or math.isnan(width))
                    else " within a geological horizon")
    threshold = opt("trajectory", "threshold_occupancy", " (occupancy {:g})")
    methods = [
        {"title": "Past warming intervals and fates",
         "text": ("Fossil taxa are followed through a catalogue of past episodes of volcanic CO₂ release and "
                  "warming. A taxon is at risk in an interval when its range reaches into it and lost when its "
                  "last occurrence falls inside it (boundary-crosser logic)"
                  + (f"; {'; '.join(guards)}" if guards else "") + ". Occurrence ages are ranges; point ages "
                  f"are drawn within them many times{draws} and the results combined with Rubin's rules, so age "
                  "uncertainty widens the intervals."),
         "refs": ["foote2000", "signor1982", "rubin1987"]},
        {"title": "Selectivity",
         "text": ("Within each interval, loss is modelled by logistic regression on trait classes with Firth's "
                  "penalized likelihood, which gives finite estimates in the small and separated samples "
                  "typical of fossil data, with profile penalized-likelihood intervals. Categorical traits are "
                  "compared with a reference class, ordered traits per step, numeric traits per standard "
                  "deviation."),
         "refs": ["firth1993", "heinze2002"]},
        {"title": "Pooling across intervals",
         "text": (f"Per-interval log odds ratios are pooled by random-effects meta-analysis, with the "
                  f"between-interval variance tau² estimated by {pooling}, Cochran's Q and I²; the "
                  f"Hartung–Knapp–Sidik–Jonkman adjustment for few intervals is {hksj}. Intervals are weighted by "
                  "how close their warming was to the scenario "
                  f"({'+' + format(warming, 'g') + ' °C' if not math.isnan(warming) else 'as set'}"
                  f"{', ' + scale if scale else ''}). Leave-one-interval-out checks predict each interval's "
                  "losses from the others and score them by AUC."),
         "refs": ["dersimonian1986", "viechtbauer2005", "hartung2001", "sidik2002", "higgins2002", "hanley1982",
                  "ipcc2021"]},
        {"title": "Matching living taxa to fossil relatives",
         "text": ("Each living taxon is matched to fossil relatives by taxonomic distance on the rank tree "
                  "combined with Gower's mixed-type trait distance (Podani's extension for ordinal traits). Its "
                  "analog score combines the pooled trait model's prediction with its relatives' observed fates; "
                  "intervals come from a bootstrap over fossil taxa."),
         "refs": ["gower1971", "podani1999", "efron1993"]},
        {"title": "Occupancy trajectories",
         "text": (f"For each lineage, occupancy in {bins} is the share of sampled {unit_text} where it was "
                  "found. Stasis, random walk, random walk with drift and rise-and-fall models are fitted to logit "
                  "occupancy and compared by AICc and Akaike weights."),
         "refs": ["foote2007", "liow2007", "hurvich1989", "burnham2002"]},
        {"title": "Trajectory score",
         "text": (f"For living taxa, the chance of falling to a quasi-extinction threshold{threshold}{horizon_text} "
                  "uses the diffusion approximation (first passage of Brownian motion with drift) for the "
                  "random-walk models and the projected curve for rise-and-fall, averaged over models with "
                  "Akaike weights, with a parametric bootstrap for uncertainty. The horizon is geological: the "
                  "score ranks lineages and is not a dated forecast."),
         "refs": ["lande1988", "dennis1991", "burnham2002"]},
        {"title": "Noise null and hindcast",
         "text": ("A random walk pinned to zero at its start and end (a Brownian excursion) draws hat shapes by "
                  "itself; finished histories are compared with simulated excursions of the same length. The "
                  "hindcast cuts short the histories of taxa whose fate is known and scores each reading by AUC "
                  "and Brier score."),
         "refs": ["hanley1982", "brier1950"]},
        {"title": "Combined ranking and comparison",
         "text": ("The two scores are pooled on the logit scale with weights from each line's measured skill (or "
                  f"as set by the user); the {ilabel} comes from propagating both lines' bootstrap draws. Rank "
                  "agreement is measured by Kendall's tau-b and Spearman's rho with bootstrap intervals."),
         "refs": ["kendall1945", "spearman1904", "efron1993"]},
        {"title": "Regions",
         "text": ("Modern occurrence records are assigned to the region polygons. Per region: taxa present, "
                  "expected losses (the sum of combined scores, with an interval), mean score, taxa in the "
                  "highest tier, and the expected loss of taxonomic diversity on the rank tree."),
         "refs": ["faith2008"]},
    ]
    chart = _chart_version()
    methods.append({"title": "Time scale",
                    "text": ("Stage names resolve to numeric ages through the bundled ICS International "
                             "Chronostratigraphic Chart" + (f", version {chart}." if chart else
                                                             " (version not recorded in this build).")),
                    "refs": ["cohen2013"]})
    for m in methods:
        m["refs"] = [(k, REFERENCES[k][0]) for k in m["refs"]]
    return methods


def _chart_version() -> str:
    try:
        ref = importlib.import_module("analog.reference")
    except ModuleNotFoundError:
        return ""
    return _text(getattr(ref, "CHART_VERSION", ""))


def _settings(r: _Run) -> list[tuple[str, list[tuple[str, str]]]]:
    out = []
    sections = getattr(r.config, "sections", {}) or {}
    for name in sorted(sections):
        p = sections[name]
        try:
            values = p.to_dict()
        except AttributeError:
            continue
        out.append((name, [(k, _setting_text(v)) for k, v in values.items()]))
    return out


def _setting_text(v: Any) -> str:
    if isinstance(v, (list, tuple)):
        return ", ".join(_setting_text(x) for x in v)
    if v is None:
        return "not set"
    if isinstance(v, bool):
        return "yes" if v else "no"
    return str(v)


def _provenance(r: _Run) -> dict:
    files = []
    for f in getattr(r.study, "files", []) or []:
        path = getattr(f, "path", "")
        name = getattr(path, "name", None) or str(path)
        files.append({"role": _pretty(getattr(f, "role", "")), "name": name,
                      "sha256": _text(getattr(f, "sha256", "")), "rows": fmt_int(getattr(f, "rows", None))})
    dropped = getattr(r.study, "dropped", None)
    drops = []
    if isinstance(dropped, pd.DataFrame):
        for row in dropped.to_dict("records"):
            ex = row.get("examples")
            if isinstance(ex, (list, tuple, np.ndarray)):
                ex = ", ".join(str(e) for e in ex)
            drops.append({"role": _pretty(_text(row.get("role"))), "reason": _text(row.get("reason")),
                          "count": fmt_int(row.get("count")), "examples": _text(ex)})
    warn = list(getattr(r.study, "warnings", []) or []) + [w for w in getattr(r.run, "warnings", []) or []]
    seen, unique = set(), []
    for w in warn:
        if str(w) not in seen:
            seen.add(str(w))
            unique.append(str(w))
    unassigned = getattr(getattr(r.run, "regions", None), "unassigned", None)
    projection = _text(getattr(getattr(r.run, "regions", None), "projection", ""))
    return {"files": files, "dropped": drops, "warnings": unique,
            "skipped": [(_pretty(k), v) for k, v in r.skipped.items()],
            "stages": [_pretty(s) for s in getattr(r.run, "stages_done", []) or []],
            "unassigned": fmt_int(unassigned) if not _missing(unassigned) else "",
            "projection": projection}


def _is_demo(r: _Run) -> bool:
    """The embedded demo study (or a study whose name says it is a demo): its data are invented."""
    from .._resources import resource_dir

    folder = getattr(r.config, "folder", None)
    try:
        if folder is not None and Path(folder).resolve() == resource_dir("demo").resolve():
            return True
    except OSError:  # no shipped demo folder: fall back on the name
        pass
    return str(getattr(r.config, "name", "")).strip().lower().startswith("demo")


# -- figures by section -------------------------------------------------------------------------------
def _section_figures(r: _Run) -> dict[str, list[FigureRef]]:
    """Figures by section, found by their stems; stems no rule claims go to 'other'."""
    traits = getattr(r.config, "traits", {}) or {}
    out: dict[str, list[FigureRef]] = {"ranking": [], "maps": [], "analog": [], "trajectory": [],
                                       "disagreements": [], "other": []}
    rules = [  # (test on the stem, section, alt text, caption); first match wins
        (lambda s: s.startswith("top_taxa"), "ranking",
         "Bar chart of the taxa with the highest combined scores, with interval bars.",
         "Taxa with the highest combined scores; bars show the uncertainty interval."),
        (lambda s: "difference" in s and "map" in s, "maps",
         "Map of the difference between the analog and trajectory scores by region.",
         "Analog minus trajectory score by region; the colour scale is centred on zero (no difference)."),
        (lambda s: "map" in s and ("by_line" in s or "side_by_side" in s), "maps",
         "Two maps side by side: analog score and trajectory score by region, on one colour scale.",
         "Analog and trajectory evidence by region, on the same colour scale."),
        (lambda s: "map" in s, "maps", "Map of regions shaded by combined relative vulnerability.",
         "Combined relative vulnerability by region. Hatched regions have too little data to judge."),
        (lambda s: "null" in s, "trajectory",
         "Comparison of the shapes of finished histories with simulated random walks pinned at both ends.",
         "Shapes of finished (extinct) histories against simulated noise-only histories."),
        (lambda s: s.startswith("trajector") and "extinct" in s, "trajectory",
         "Small multiples of occupancy through time for extinct lineages, with fitted curves.",
         "Occupancy histories of extinct lineages (finished histories) with the fitted readings."),
        (lambda s: s.startswith("trajector") and ("extant" in s or "living" in s), "trajectory",
         "Small multiples of occupancy through time for living lineages, with fitted curves.",
         "Occupancy histories of living lineages with the fitted readings."),
        (lambda s: s.startswith("trajector"), "trajectory",
         "Small multiples of occupancy through time for selected lineages, with fitted curves.",
         "Occupancy histories of selected lineages with the fitted readings."),
        (lambda s: s.startswith("rank_scatter") or "scatter" in s, "disagreements",
         "Scatter plot of analog rank against trajectory rank, largest disagreements labelled.",
         "Analog rank against trajectory rank; points far from the diagonal disagree most."),
    ]
    for stem in sorted(r.figures):
        if stem.startswith("forest_"):
            trait = stem[len("forest_"):]
            label = traits[trait].display if trait in traits else _pretty(trait)
            ref = r.figure(stem, alt=f"Forest plot of odds ratios of loss by {label}, per warming interval and "
                                      "pooled.",
                           caption=f"{label[:1].upper() + label[1:]}: odds ratio of loss per warming interval and "
                                   "pooled. Above 1: lost more often than the reference.")
            if ref is not None:
                out["analog"].append(ref)
            continue
        for test, section, alt, caption in rules:
            if test(stem):
                ref = r.figure(stem, alt=alt, caption=caption)
                if ref is not None:
                    out[section].append(ref)
                break
    for stem in sorted(r.figures):
        if stem not in r.used_figures:
            ref = r.figure(stem, alt=f"Figure {_pretty(stem)}.", caption=_pretty(stem).capitalize() + ".")
            if ref is not None:
                out["other"].append(ref)
    out["maps"].sort(key=lambda f: (2 if "difference" in f.stem else 1 if ("by_line" in f.stem or "side" in f.stem)
                                    else 0, f.stem))
    out["trajectory"].sort(key=lambda f: ("null" in f.stem, "extinct" in f.stem, f.stem))
    return out


# --------------------------------------------------------------------------------------------------
# rendering
# --------------------------------------------------------------------------------------------------
def _asset(name: str) -> markupsafe.Markup:
    text = resources.files(__package__).joinpath("templates", name).read_text(encoding="utf-8")
    return markupsafe.Markup(text)  # our own CSS/JS, inlined as is


@functools.lru_cache(maxsize=1)
def _environment() -> jinja2.Environment:
    """One environment per process, so templates are compiled once."""
    env = jinja2.Environment(
        loader=jinja2.PackageLoader("analog.briefing", "templates"),
        autoescape=True,
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
    )
    env.filters.update(num=fmt_num, int=fmt_int, pct=fmt_pct, ratio=fmt_ratio)
    env.globals.update(taxon_html=taxon_html, tier_chip_html=tier_chip_html)
    return env


def build_briefing(run: Any, *, figures: Mapping[str, Mapping[str, bytes]] | None = None,
                   draw_insets: bool | None = None) -> dict[str, str]:
    """Render the briefing and one page per region.

    Parameters
    ----------
    run : analog.pipeline.RunResult
        A finished run. Missing stages, tables or columns are tolerated: the page says plainly
        which sections have no data and why.
    figures : mapping, optional
        Figure stem -> {format: bytes} as rendered by the output writer. Figures are placed by
        their stems (``forest_*``, ``trajector*``, ``*null*``, ``*map*`` with ``difference`` or
        ``by_line``/``side_by_side`` variants, ``rank_scatter``, ``top_taxa``); any other stem is
        shown under "Other figures", so nothing drawn is lost.
    draw_insets : bool, optional
        Draw a map inset per region with ``analog.figures.maps.region_inset`` when that function
        exists. Default: only when ``figures`` is non-empty (so a run without figures stays
        without images).

    Returns
    -------
    dict of str to str
        ``{"briefing.html": html, "regions/<region>.html": html, ...}``. Identical input gives
        byte-identical pages (no clock is read).

    Notes
    -----
    Pages are self-contained: each figure is embedded as base64 data (its SVG when that is smaller
    than the PNG, else the PNG, downsampled beyond ``EMBED_MAX_PX`` pixels wide), CSS and the small
    sorting script are inline, and a Content-Security-Policy forbids fetching anything. Region file names are the region ids
    with characters outside ``A-Z a-z 0-9 . _ -`` replaced by ``_`` (see :func:`region_page_name`).

    Long tables are cut, in combined-rank order, with a sentence saying so: the study-wide ranked
    table at ``MAX_RANKING_ROWS`` taxa (rankings.csv has all of them) and each region page's table
    at ``MAX_REGION_ROWS`` taxa (region_taxa.csv has every taxon recorded in each region). Sorting
    a cut table reorders the rows shown.
    """
    r = _Run(run, figures)
    if draw_insets is None:
        draw_insets = bool(r.figures)
    rankings = _rankings(r)
    risk = _RiskRows(r, rankings) if rankings is not None else None
    regions = _regions(r, risk, draw_insets=draw_insets)
    figs = _section_figures(r)
    config = r.config
    ilabel = _interval_label(r)
    common = {
        "study": {"name": _text(getattr(config, "name", "")) or "Untitled study",
                  "description": _text(getattr(config, "description", "")),
                  "data_date": _text(getattr(config, "data_date", "")),
                  "warming": fmt_num(getattr(config, "warming_c", math.nan), 1).rstrip("0").rstrip("."),
                  "seed": _text(getattr(config, "seed", ""))},
        "version": __version__,
        "demo": _is_demo(r),
        "css": _asset("briefing.css"),
        "js": _asset("sort.js"),
        "tiers": [TIERS[n] for n in TIER_NAMES],
        "tier_rule": _tier_rule(r),
        "interval_label": ilabel,
        "missing": MISSING,
        "no_figures": "" if r.figures or draw_insets else "No figures were drawn for this run; the tables are complete.",
    }
    ranking_table = _ranking_table(r, risk) if risk is not None else None
    context = {
        **common,
        "summary": _summary(r, rankings, regions),
        "ranking": ranking_table,
        "ranking_missing": None if rankings is not None else r.why_missing("combine"),
        "regions": regions,
        "toc_region_limit": TOC_REGION_LIMIT,
        "region_overview": _region_overview(r, regions) if regions else None,
        "regions_missing": None if regions else r.why_missing("regions"),
        "figures": figs,
        "analog_missing": None if r.analog_tables else r.why_missing("analog"),
        "pooling": _pooling(r),
        "loo": _loo(r),
        "interval_weights": _interval_weights(r),
        "trajectory_missing": None if r.trajectory_tables else r.why_missing("trajectory"),
        "hindcast_table": _hindcast_table(r),
        "noise_null": _noise_null(r),
        "preferred": _preferred_counts(r),
        "trajectory_unscored": _unscored(r, "trajectory", "trajectory_risk.csv", "trajectory_p"),
        "analog_unscored": _unscored(r, "analog", "analog_risk.csv", "analog_p"),
        "comparison": _comparison_table(r),
        "disagreements": _disagreements(r),
        "sensitivity": _sensitivity(r),
        "combined_missing": None if r.combined_tables else r.why_missing("combine"),
        "methods": _methods(r),
        "references": [(k, REFERENCES[k][1]) for k in sorted(REFERENCES, key=lambda k: REFERENCES[k][1])],
        "settings": _settings(r),
        "provenance": _provenance(r),
    }
    env = _environment()
    pages = {"briefing.html": env.get_template("briefing.html.j2").render(context)}
    region_template = env.get_template("region.html.j2")
    for g in regions:
        pages[f"regions/{g.slug}.html"] = region_template.render({**common, "region": g,
                                                                  "provenance": context["provenance"]})
    return pages
