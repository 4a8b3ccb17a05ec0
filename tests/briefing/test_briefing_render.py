"""build_briefing on a synthetic run: structure, escaping, missing data, determinism, links."""
from __future__ import annotations

import base64
import re
import sys
import types
import warnings
from html.parser import HTMLParser

import matplotlib.pyplot as plt
import pytest

from analog.briefing import build_briefing, region_page_name
from analog.briefing.references import REFERENCES
from analog.errors import AnalogWarning
from analog.figures.style import TIER_COLOURS
from analog.pipeline import RunResult

from briefing_inputs import ODD_REGION_ID, ODD_REGION_NAME, ODD_TAXON, make_study

VOID = {"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "source", "track", "wbr"}


class PageScan(HTMLParser):
    """Collects ids, links, images, scripts and checks that non-void tags are balanced."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.stack, self.errors = [], []
        self.ids, self.hrefs, self.imgs, self.scripts, self.links = [], [], [], [], []
        self.tables: dict[str, list] = {}
        self._table = None
        self._row = None
        self._cell = None
        self.text = []

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if "id" in a:
            self.ids.append(a["id"])
        if tag == "a" and "href" in a:
            self.hrefs.append(a["href"])
        if tag == "img":
            self.imgs.append(a)
        if tag == "script":
            self.scripts.append(a)
        if tag == "link":
            self.links.append(a)
        if tag == "table":
            self._table = a.get("id")
            self.tables.setdefault(self._table, [])
        if tag == "tr" and self._table is not None:
            self._row = []
        if tag in ("td", "th") and self._row is not None:
            self._cell = {"attrs": a, "text": ""}
        if tag not in VOID:
            self.stack.append(tag)

    def handle_endtag(self, tag):
        if tag in VOID:
            return
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"</{tag}> closes <{self.stack[-1] if self.stack else None}>")
            if tag in self.stack:
                while self.stack and self.stack.pop() != tag:
                    pass
            return
        self.stack.pop()
        if tag in ("td", "th") and self._cell is not None:
            self._row.append(self._cell)
            self._cell = None
        if tag == "tr" and self._row is not None:
            self.tables[self._table].append(self._row)
            self._row = None
        if tag == "table":
            self._table = None

    def handle_data(self, data):
        if not self.stack or self.stack[-1] not in ("script", "style"):
            self.text.append(data)
        if self._cell is not None:
            self._cell["text"] += data


def scan(html: str) -> PageScan:
    p = PageScan()
    p.feed(html)
    p.close()
    assert not p.errors, p.errors[:5]
    assert p.stack == [], f"unclosed tags: {p.stack}"
    return p


@pytest.fixture
def pages(synthetic_run, synthetic_figures):
    return build_briefing(synthetic_run, figures=synthetic_figures, draw_insets=False)


def test_pages_and_region_file_names(pages):
    assert set(pages) == {"briefing.html", "regions/R1.html", "regions/R3.html",
                          f"regions/{region_page_name(ODD_REGION_ID)}.html"}
    assert region_page_name(ODD_REGION_ID) == "R_2_x"
    for name in pages:
        assert re.fullmatch(r"briefing\.html|regions/[A-Za-z0-9._-]+\.html", name)


def test_region_page_name_is_safe_and_unique():
    taken: set[str] = set()
    names = [region_page_name(x, taken) for x in ["a/b", "a b", "../x", "", "ok-1"]]
    assert names == ["a_b", "a_b-2", "x", "region", "ok-1"]
    assert all(".." not in n and "/" not in n for n in names)


def test_odd_names_are_escaped(pages):
    for html in pages.values():
        assert "<script>alert(1)</script>" not in html
        assert ODD_TAXON not in html
        assert "<i>sp.</i>" not in html  # the dropped-record example stays text
    main = pages["briefing.html"]
    assert "&lt;b&gt;Taxon &amp; co&lt;/b&gt;" in main
    assert "&lt;script&gt;alert(1)&lt;/script&gt; Bay &amp; Shoals" in main
    assert "modern &amp; &lt;odd&gt;.csv" in main
    # the only scripts are our own inline one
    p = scan(main)
    assert len(p.scripts) == 1 and "src" not in p.scripts[0]
    assert any(ODD_REGION_NAME in t for t in p.text)  # readable as text once parsed


def test_self_contained_and_links_resolve(pages):
    for name, html in pages.items():
        p = scan(html)
        assert not p.links, "no external stylesheets"
        assert not re.search(r"""(src|href)\s*=\s*["']?(https?:)?//""", html), name
        assert p.imgs or name != "briefing.html"
        for img in p.imgs:
            assert img["src"].startswith(("data:image/png;base64,", "data:image/svg+xml;base64,"))
            base64.b64decode(img["src"].split(",", 1)[1], validate=True)
            assert img.get("alt")
        ids = set(p.ids)
        assert len(ids) == len(p.ids), f"duplicate ids in {name}"
        main_ids = set(scan(pages["briefing.html"]).ids)
        for href in p.hrefs:
            target, _, anchor = href.partition("#")
            if not target:
                assert anchor in ids, f"{name}: broken anchor {href}"
            elif name == "briefing.html":
                assert target in pages, f"{name}: link to missing page {href}"
            else:
                assert target == "../briefing.html" and (not anchor or anchor in main_ids), href


def test_every_figure_is_embedded_once(pages, synthetic_figures):
    main = pages["briefing.html"]
    for stem, formats in synthetic_figures.items():
        data = formats.get("png") or formats["svg"]
        assert main.count(base64.b64encode(data).decode()) == 1, stem
    assert "Other figures" in main and "Unexpected extra." in main  # unknown stems are not lost


def test_ranked_table_is_sortable_and_ordered(pages):
    p = scan(pages["briefing.html"])
    rows = p.tables["table-ranking"]
    head, body = rows[0], rows[1:]
    assert len(body) == 8
    assert all(c["attrs"].get("data-type") in {"number", "text"} for c in head)
    assert [c["attrs"].get("aria-sort") for c in head].count("ascending") == 1
    ranks = [c[0]["attrs"]["data-sort"] for c in body]
    assert ranks[:7] == ["1", "2", "3", "4", "5", "6", "7"] and ranks[7] == ""  # unranked taxon last
    assert "<button type=\"button\" class=\"sort\">Combined score" in pages["briefing.html"]
    assert body[0][1]["text"].strip() == "Alpha marina"


def test_summary_states_agreement_and_hindcast_in_words(pages):
    text = re.sub(r"\s+", " ", "".join(scan(pages["briefing.html"]).text))
    # tau-b 0.42 with interval 0.12-0.70: "moderate" band of the stated rule of thumb, interval excludes 0
    assert "The two lines of evidence moderately agree: Kendall's tau-b is 0.42 (interval 0.12 to 0.70)" in text
    assert "Spearman's rho is 0.55" in text
    assert "The interval of tau-b excludes zero: the agreement is more than chance would give." in text
    assert ("the rise-and-fall reading predicted better than the random walk reading in the hindcast: "
            "AUC 0.71 (interval 0.62 to 0.80) against 0.55 (interval 0.45 to 0.65)") in text
    assert "does not clearly tell the two readings apart" in text  # 0.62-0.80 overlaps 0.45-0.65
    assert "weights the analog line 60% and the trajectory line 40%" in text
    assert "Depth zone: basin: more often lost than the reference class (shelf) (pooled odds ratio 3.32" in text
    assert "1 of 3 regions have too little data to judge" in text
    # analog AUC 0.68 against trajectory 0.61
    assert "On these checks the analog line predicted better than the trajectory line." in text
    # two regions with enough data: Northern Shelf has the larger expected losses (1.45 vs 0.97) and mean (0.72)
    assert "Among the 2 regions with enough data, Northern Shelf ranks 1st by expected losses and 1st by mean score" in text
    # noise null, data-set rows of the synthetic table: peakedness 2.6 against 1.8 with p = 0.001
    assert "they are more sharply peaked than pinned noise (peakedness 2.60 against 1.80, p = 0.001)" in text
    assert "their peak position and symmetry are consistent with noise" in text
    assert "more sharply hat-shaped than pinned noise would draw" in text
    assert "they carry more of their history late than pinned noise (symmetry 0.20 against 0.00, p = 0.004)" in text
    assert "Their intervals overlap widely" not in text  # top-5 intervals 0.71-0.91 vs 0.23-0.43 do not overlap


def test_no_sentences_run_together(pages):
    # template whitespace control must not glue a sentence to the next one ("...apart.Best")
    for name, html in pages.items():
        text = re.sub(r"\s+", " ", "".join(scan(html).text))
        assert not re.findall(r"[a-z)]\.[A-Z][a-z]", text), (name, re.findall(r".{30}[a-z)]\.[A-Z][a-z].{10}", text))


def test_agreement_interval_through_zero_is_called_chance(synthetic_run):
    comp = synthetic_run.combined.comparison
    comp.loc[comp["statistic"] == "kendall_tau_b", ["estimate", "low", "high"]] = [0.05, -0.2, 0.3]
    html = build_briefing(synthetic_run, figures={})["briefing.html"]
    assert "hardly agree at all" in html and "cannot be told apart from chance" in html


def test_cautions_top_and_bottom_and_demo_note(pages, synthetic_run, tmp_path):
    main = pages["briefing.html"]
    top, toc, full = main.index("Read this first"), main.index('id="toc-head"'), main.index('id="cautions-head"')
    assert top < toc < full
    assert main.index("Signor–Lipps") > full
    for word in ("not a forecast", "not a formal threat", "official assessment processes", "local regulations",
                 "expert review", "Sampling.", "Age uncertainty.", "Taxonomic level."):
        assert word in main
    assert "Demonstration data" not in main
    for name, html in pages.items():
        assert "Read this first" in html and 'id="cautions-head"' in html, name
    synthetic_run.study = make_study(tmp_path, name="Demo: invented coast")
    demo = build_briefing(synthetic_run, figures={})
    assert all("Demonstration data" in html for html in demo.values())


def test_methods_cite_their_references(pages):
    main = pages["briefing.html"]
    for short in ("Firth 1993", "Heinze &amp; Schemper 2002", "DerSimonian &amp; Laird 1986", "Hartung &amp; Knapp 2001",
                  "Sidik &amp; Jonkman 2002", "Higgins &amp; Thompson 2002", "Gower 1971", "Podani 1999",
                  "Foote 2000", "Rubin 1987", "Foote et al. 2007", "Liow &amp; Stenseth 2007",
                  "Hurvich &amp; Tsai 1989", "Burnham &amp; Anderson 2002", "Lande &amp; Orzack 1988",
                  "Dennis, Munholland &amp; Scott 1991", "Faith 2008"):
        assert f">{short}</a>" in main, short
    for key in REFERENCES:
        assert f'id="ref-{key}"' in main


def test_tier_colours_and_contrast(pages):
    main = pages["briefing.html"]
    for colour in TIER_COLOURS.values():
        assert f"background-color: {colour};" in main

    # WCAG 2.1 contrast ratio (W3C, "contrast ratio" and "relative luminance" definitions); 4.5:1 for text
    def lum(hexcolour):
        c = [int(hexcolour[i:i + 2], 16) / 255 for i in (1, 3, 5)]
        c = [x / 12.92 if x <= 0.03928 else ((x + 0.055) / 1.055) ** 2.4 for x in c]
        return 0.2126 * c[0] + 0.7152 * c[1] + 0.0722 * c[2]

    chips = re.findall(r'class="tier" style="background-color: (#[0-9a-f]{6}); color: (#[0-9a-f]{6});"', main)
    assert chips
    for bg, ink in set(chips):
        hi, lo = sorted((lum(bg), lum(ink)), reverse=True)
        assert (hi + 0.05) / (lo + 0.05) >= 4.5, (bg, ink)


def test_insufficient_region_said_plainly(pages):
    far = pages["regions/R3.html"]
    assert "Too little data to judge this region" in far and "insufficient: 2 records" in far
    assert "not as low risk" in far
    assert "No living taxon of the study has records in this region." in far


def test_region_page_lists_its_taxa_with_records(pages):
    html = pages["regions/R1.html"]
    p = scan(html)
    rows = p.tables["table-taxa-R1"][1:]
    names = [r[1]["text"].strip() for r in rows]
    assert names == ["Alpha marina", "<b>Taxon & co</b>", "Theta ignota"]
    assert [r[-1]["text"].strip() for r in rows] == ["40", "12", "5"]
    assert 'href="../briefing.html"' in html


def test_missing_stages_are_said_plainly(synthetic_run):
    synthetic_run.trajectory = None
    synthetic_run.skipped = {"trajectory": "trajectory stage not available in this build"}
    html = build_briefing(synthetic_run, figures={})["briefing.html"]
    assert "This part did not run: trajectory stage not available in this build." in html
    scan(html)

    bare = RunResult(study=synthetic_run.study, skipped={"analog": "not available", "combine": "needs evidence"})
    out = build_briefing(bare, figures={})
    assert list(out) == ["briefing.html"]
    html = out["briefing.html"]
    scan(html)
    assert "This part did not run: needs evidence." in html
    assert "This part did not run: not available." in html
    assert "No data are available for this part." in html  # regions: never ran, no reason recorded
    assert "<img" not in html
    with_tables = build_briefing(synthetic_run, figures={})["briefing.html"]
    assert "No figures were drawn for this run; the tables are complete." in with_tables


def test_missing_columns_do_not_crash(synthetic_run):
    r = synthetic_run.combined
    r.rankings = r.rankings[["taxon_id", "scientificName", "combined_p"]]
    r.comparison = r.comparison.iloc[0:0]
    synthetic_run.regions.summary_table = synthetic_run.regions.summary_table[["region_id", "name"]]
    html = build_briefing(synthetic_run, figures={})["briefing.html"]
    scan(html)
    assert "The agreement between the two lines could not be measured" in html


def test_deterministic(synthetic_run, synthetic_figures):
    a = build_briefing(synthetic_run, figures=synthetic_figures, draw_insets=False)
    b = build_briefing(synthetic_run, figures=dict(reversed(list(synthetic_figures.items()))), draw_insets=False)
    assert a == b
    assert not re.search(r"20\d\d-\d\d-\d\dT\d\d:", a["briefing.html"])  # no clock time
    assert "2026-11-01" in a["briefing.html"]  # the study's data date is shown


@pytest.fixture
def fake_maps(monkeypatch):
    calls = []

    def region_inset(region_id, region_result, *, context=None, params=None):
        assert region_result is not None and params is None  # the synthetic study has no [figures]
        calls.append(region_id)
        if region_id == "R3":
            raise ValueError("no geometry")
        fig, ax = plt.subplots(figsize=(2, 2))
        ax.plot([0, 1], [0, 1])
        return fig

    module = types.ModuleType("analog.figures.maps")
    module.region_inset = region_inset
    monkeypatch.setitem(sys.modules, "analog.figures.maps", module)
    return calls


def test_region_insets_drawn_in_memory(synthetic_run, synthetic_figures, fake_maps):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        out = build_briefing(synthetic_run, figures=synthetic_figures)
    assert sorted(fake_maps) == sorted(["R1", ODD_REGION_ID, "R3"])
    assert "<img" in out["regions/R1.html"] and "Northern Shelf (outlined)" in out["regions/R1.html"]
    assert "No map inset is available for this region." in out["regions/R3.html"]
    assert any(issubclass(w.category, AnalogWarning) and "R3" in str(w.message) for w in caught)
    fake_maps.clear()
    build_briefing(synthetic_run, figures={})  # no figures drawn -> no insets either
    assert fake_maps == []


def test_real_region_inset_when_available(synthetic_run):
    maps = pytest.importorskip("analog.figures.maps")
    if not hasattr(maps, "region_inset"):
        pytest.skip("analog.figures.maps.region_inset is not part of this build")
    with warnings.catch_warnings():
        warnings.simplefilter("error", AnalogWarning)  # an inset that fails to draw fails the test
        out = build_briefing(synthetic_run, figures={}, draw_insets=True)
    for name in ("regions/R1.html", "regions/R3.html"):
        img = scan(out[name]).imgs
        assert len(img) == 1 and img[0]["src"].startswith("data:image/png;base64,")
        png = base64.b64decode(img[0]["src"].split(",", 1)[1])
        assert png[:8] == b"\x89PNG\r\n\x1a\n"


def test_long_tables_are_capped_with_a_pointer_to_the_csv(synthetic_run, monkeypatch):
    """Above the caps the HTML shows the first rows in combined-rank order and says where the rest are;
    below them (the synthetic run as is) every taxon is listed, as before."""
    from analog.briefing import render

    full = build_briefing(synthetic_run, figures={}, draw_insets=False)
    assert len(scan(full["briefing.html"]).tables["table-ranking"]) == 1 + 8
    assert "rankings.csv lists" not in full["briefing.html"]

    monkeypatch.setattr(render, "MAX_RANKING_ROWS", 3)
    monkeypatch.setattr(render, "MAX_REGION_ROWS", 2)
    pages = build_briefing(synthetic_run, figures={}, draw_insets=False)
    html = pages["briefing.html"]
    rows = scan(html).tables["table-ranking"][1:]
    assert [r[0]["text"].strip() for r in rows] == ["1", "2", "3"]
    assert [r[1]["text"].strip() for r in rows] == ["Alpha marina", ODD_TAXON, "Gamma profunda"]
    assert "The 3 most vulnerable of the 8 living taxa in the study" in html
    assert "sorting reorders these rows only. rankings.csv in the same output folder lists all 8 taxa" in html
    assert "unranked, at the end of rankings.csv" in html   # the taxon without evidence is not in the table
    assert "with the 2 most vulnerable of the 3 taxa recorded there" in html   # Northern Shelf (3 recorded)
    assert "with all 2 taxa recorded there" in html                           # the odd region (2 recorded)

    region = pages["regions/R1.html"]
    rows = scan(region).tables["table-taxa-R1"][1:]
    assert [(r[1]["text"].strip(), r[-1]["text"].strip()) for r in rows] == [("Alpha marina", "40"),
                                                                                (ODD_TAXON, "12")]
    assert "The 2 most vulnerable of the 3 living taxa recorded in Northern Shelf" in region
    assert "region_taxa.csv in the output folder lists every taxon recorded in each region" in region
    # the briefing's top table is not capped by the region page's limit
    top = scan(html).tables["table-top-R1"][1:]
    assert [r[1]["text"].strip() for r in top] == ["Alpha marina", ODD_TAXON]   # Theta ignota has no tier


def test_table_cells_escape_like_the_templates():
    """Cells rendered in Python escape as jinja's autoescape (markupsafe) does."""
    import markupsafe

    from analog.briefing.render import Cell, Taxon, _cell_html

    odd = "<b>\"Q\" & 'A'</b>"
    html = _cell_html(Cell(odd, odd, "num", title=odd))
    esc = str(markupsafe.escape(odd))
    assert html == f'<td class="num" data-sort="{esc}" title="{esc}">{esc}</td>\n'
    taxon = _cell_html(Cell(odd, None, "taxon", taxon=Taxon("t", odd, True)))
    assert taxon == f'<td class="taxon"><i>{esc}</i></td>\n'


def test_region_names_sort_naturally():
    from analog.briefing.render import _natural_key

    names = ["District 10", "district 2", "District 1", "Ombrel Deep", "District 100", "Area 7b", "Area 7a"]
    assert sorted(names, key=_natural_key) == ["Area 7a", "Area 7b", "District 1", "district 2", "District 10",
                                               "District 100", "Ombrel Deep"]


def test_many_regions_leave_insets_to_their_own_pages(synthetic_run, synthetic_figures, fake_maps, monkeypatch):
    """Above the contents limit the main page neither lists every region nor embeds every inset."""
    from analog.briefing import render

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AnalogWarning)  # the fake inset of R3 fails on purpose
        few = build_briefing(synthetic_run, figures=synthetic_figures)["briefing.html"]
        monkeypatch.setattr(render, "TOC_REGION_LIMIT", 2)   # the synthetic study has three regions
        out = build_briefing(synthetic_run, figures=synthetic_figures)
    assert 'class="toc-regions"' in few and "own page</a> (with" not in few
    main = out["briefing.html"]
    assert 'class="toc-regions"' not in main and "3 regions, in the order of the table" in main
    assert 'The locator map is on <a href="regions/R1.html">this region\'s own page</a>' in main
    assert "<img" in out["regions/R1.html"]   # the region's own page keeps its map
