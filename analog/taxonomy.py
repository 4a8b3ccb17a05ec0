"""Taxonomic structure from the Darwin Core rank columns of the taxa table.

Two views of the same ranks:

* :func:`build_rank_tree` — a ``networkx.DiGraph`` (root -> kingdom -> ... -> genus
  -> taxon) for display and tree-based diversity measures;
* :func:`taxonomic_distance_matrix` / :func:`shared_rank_depth` — fast all-pairs
  comparison of rank columns, for matching living taxa to fossil relatives.

Taxonomic distance is the number of rank levels one climbs from a taxon to the
lowest rank it shares with the other, divided by the number of levels
(kingdom, phylum, class, order, family, genus, taxon = 7): 0 for the same taxon,
1/7 for two taxa of one genus, 1 when not even the kingdom is shared.
"""
from __future__ import annotations

import warnings

import numpy as np
import pandas as pd

from .errors import AnalogWarning, InputError, Problem
from .study import RANK_COLUMNS

__all__ = ["RANK_LEVELS", "fill_higher_ranks", "build_rank_tree", "lowest_shared_rank", "shared_rank_depth",
           "shared_rank_depth_blocks", "depth_distance", "taxonomic_distance_matrix"]

# Depth 0 = nothing shared, 1..6 = the rank columns, 7 = the same taxon.
RANK_LEVELS = ("root",) + RANK_COLUMNS + ("taxon",)
_N_LEVELS = len(RANK_LEVELS) - 1
ROOT = "root"


def _check_columns(taxa: pd.DataFrame, where: str):
    missing = [c for c in ("taxon_id",) + RANK_COLUMNS if c not in taxa.columns]
    if missing:
        raise InputError(Problem(where, f"no column(s) {missing}", f"columns taxon_id and {list(RANK_COLUMNS)}",
                                 "pass the taxa table of a loaded study (analog.intake.load_study)"))


def _blank(values: pd.Series) -> np.ndarray:
    text = values.astype("str").str.strip()
    return (values.isna() | (text == "")).to_numpy()


def _rank_text(taxa: pd.DataFrame) -> pd.DataFrame:
    """Rank columns as trimmed text, blank -> NA."""
    out = {}
    for c in RANK_COLUMNS:
        text = taxa[c].astype("str").str.strip()
        out[c] = text.where(taxa[c].notna() & (text != ""))
    return pd.DataFrame(out, index=taxa.index)


def fill_higher_ranks(taxa: pd.DataFrame) -> pd.DataFrame:
    """Fill blank higher ranks from other rows that share a lower rank.

    Parameters
    ----------
    taxa : DataFrame
        With the rank columns ``kingdom ... genus``.

    Returns
    -------
    DataFrame
        A copy with blank rank cells filled where a lower rank of the same row
        (for example the genus) sits under exactly one name at that higher rank in
        the other rows. Ambiguous cases (homonyms) stay blank. Rank cells are
        trimmed text or NA.

    Notes
    -----
    Occurrence exports often leave some higher ranks blank on some rows only; without
    this step two members of one order would look unrelated above the blank level.
    """
    out = taxa.copy()
    ranks = _rank_text(taxa)
    for depth in range(len(RANK_COLUMNS) - 1, 0, -1):  # genus first: its parents are the most specific
        low = RANK_COLUMNS[depth]
        for high in RANK_COLUMNS[:depth]:
            need = ranks[high].isna() & ranks[low].notna()
            if not need.any():
                continue
            known = ranks.loc[ranks[high].notna() & ranks[low].notna(), [low, high]].drop_duplicates()
            if known.empty:
                continue
            single = known[~known[low].duplicated(keep=False)].set_index(low)[high]
            ranks.loc[need, high] = ranks.loc[need, low].map(single)
    for c in RANK_COLUMNS:
        out[c] = ranks[c]
    return out


def build_rank_tree(taxa: pd.DataFrame, *, fill_blanks: bool = True):
    """Directed graph of the ranks: ``root`` -> kingdom -> ... -> genus -> taxon.

    Parameters
    ----------
    taxa : DataFrame
        Columns ``taxon_id``, ``kingdom, phylum, class, order, family, genus`` (blank
        allowed) and optionally ``scientificName`` and ``taxonRank``.
    fill_blanks : bool, default=True
        Fill blank higher ranks first with :func:`fill_higher_ranks`.

    Returns
    -------
    networkx.DiGraph
        Node ids are ``'root'``, ``'<rank>:<name>'`` for rank nodes (for example
        ``'family:Ostreidae'``) and ``'taxon:<taxon_id>'`` for taxa. Every node has
        attributes ``rank`` and ``name``; taxon nodes also ``taxon_id``. A blank rank
        is skipped: the node links to the next filled rank above it.

    Notes
    -----
    Rank names are prefixed with their rank so that a genus and a family of the same
    spelling stay apart. The same name at the same rank is one node; if such a name
    sits under two different parents (a homonym, or inconsistent higher ranks), the
    graph is no longer a tree and an :class:`~analog.errors.AnalogWarning` names it.
    """
    import networkx as nx

    _check_columns(taxa, "taxa")
    g = nx.DiGraph()
    g.add_node(ROOT, rank="root", name="root")
    # Unique rank paths first: a few thousand distinct paths even for 100,000 taxa.
    ranks = (fill_higher_ranks(taxa) if fill_blanks else taxa)[list(RANK_COLUMNS)]
    ranks = _rank_text(ranks).fillna("")
    paths = ranks.drop_duplicates()
    for path in paths.itertuples(index=False):
        parent = ROOT
        for rank, name in zip(RANK_COLUMNS, path):
            if not name:
                continue
            node = f"{rank}:{name}"
            if node not in g:
                g.add_node(node, rank=rank, name=name)
            g.add_edge(parent, node)
            parent = node
    leaf = pd.Series(ROOT, index=ranks.index, dtype="str")
    for rank in RANK_COLUMNS:  # the deepest filled rank is each taxon's parent
        leaf = leaf.mask(ranks[rank] != "", rank + ":" + ranks[rank])
    names = taxa["scientificName"] if "scientificName" in taxa.columns else taxa["taxon_id"]
    rank_col = taxa["taxonRank"] if "taxonRank" in taxa.columns else pd.Series(["taxon"] * len(taxa))
    for tid, name, rank, parent in zip(taxa["taxon_id"], names, rank_col, leaf):
        node = f"taxon:{tid}"
        g.add_node(node, rank=str(rank), name=str(name), taxon_id=str(tid))
        g.add_edge(parent, node)
    clashes = sorted(n for n, d in g.in_degree() if d > 1)
    if clashes:
        warnings.warn(f"rank names under more than one parent (homonyms or inconsistent higher ranks): "
                      f"{', '.join(clashes[:10])}{' ...' if len(clashes) > 10 else ''}; the rank graph is "
                      f"not a tree there", AnalogWarning, stacklevel=2)
    return g


def lowest_shared_rank(tree, a, b) -> str:
    """Lowest rank two taxa share in a graph from :func:`build_rank_tree`.

    Parameters
    ----------
    tree : networkx.DiGraph
    a, b : str
        taxon_id values.

    Returns
    -------
    str
        ``'taxon'`` if ``a == b``; else the rank of the lowest shared ancestor
        (``'genus'`` ... ``'kingdom'``), or ``'root'`` if none is shared.
    """
    import networkx as nx

    na, nb = f"taxon:{a}", f"taxon:{b}"
    for node in (na, nb):
        if node not in tree:
            raise KeyError(f"taxon_id {node[6:]!r} is not in the rank tree")
    if na == nb:
        return "taxon"
    up_a = nx.ancestors(tree, na)
    # walk up from b along its first parent chain; the first node also above a is the lowest shared
    node = nb
    while True:
        parents = list(tree.predecessors(node))
        if not parents:
            return "root"
        node = parents[0]
        if node in up_a:
            return tree.nodes[node]["rank"]


def _codes(both: pd.Series, n_a: int) -> tuple[np.ndarray, np.ndarray]:
    """Integer codes of a column of both tables stacked; blank -> -1."""
    codes, _ = pd.factorize(both, use_na_sentinel=True)
    return codes[:n_a], codes[n_a:]


def shared_rank_depth(taxa_a: pd.DataFrame, taxa_b: pd.DataFrame, *, fill_blanks: bool = True) -> np.ndarray:
    """Depth of the lowest shared rank for every pair (rows of ``taxa_a`` x rows of ``taxa_b``).

    Parameters
    ----------
    taxa_a, taxa_b : DataFrame
        Columns ``taxon_id`` and the rank columns.
    fill_blanks : bool, default=True
        Fill blank higher ranks first (:func:`fill_higher_ranks` over both tables together).

    Returns
    -------
    ndarray of int8, shape (len(taxa_a), len(taxa_b))
        Index into :data:`RANK_LEVELS`: 0 nothing shared, 1 kingdom ... 6 genus, 7 the
        same taxon_id. A rank counts as shared when both taxa have it filled with the
        same name; the deepest such rank wins (blank ranks are skipped).

    Notes
    -----
    Memory: one int8 matrix plus one boolean temporary, so 20,000 x 3,000 pairs
    take about 120 MB.
    """
    depth = np.zeros((len(taxa_a), len(taxa_b)), dtype=np.int8)
    for rows, block in shared_rank_depth_blocks(taxa_a, taxa_b, block_rows=max(len(taxa_a), 1),
                                                fill_blanks=fill_blanks):
        depth[rows] = block
    return depth


def shared_rank_depth_blocks(taxa_a: pd.DataFrame, taxa_b: pd.DataFrame, *, block_rows: int,
                             fill_blanks: bool = True):
    """:func:`shared_rank_depth`, one block of rows of ``taxa_a`` at a time.

    Parameters
    ----------
    taxa_a, taxa_b : DataFrame
        Columns ``taxon_id`` and the rank columns.
    block_rows : int
        Rows of ``taxa_a`` per block (at least 1).
    fill_blanks : bool, default=True
        Fill blank higher ranks first, over both whole tables together.

    Yields
    ------
    rows : slice
        The rows of ``taxa_a`` in this block.
    depth : ndarray of int8, shape (rows.stop - rows.start, len(taxa_b))
        The same numbers as ``shared_rank_depth(taxa_a, taxa_b)[rows]``.

    Notes
    -----
    Blank ranks are filled and names coded once for both whole tables, so the block size
    changes no depth; only one block (int8 plus one boolean temporary) is held at a time.
    """
    _check_columns(taxa_a, "taxa_a")
    _check_columns(taxa_b, "taxa_b")
    n_a = len(taxa_a)
    cols = ["taxon_id", *RANK_COLUMNS]
    both = pd.concat([taxa_a[cols], taxa_b[cols]], ignore_index=True)
    both = fill_higher_ranks(both) if fill_blanks else pd.concat([both[["taxon_id"]], _rank_text(both)], axis=1)
    codes = [_codes(both[rank], n_a) for rank in RANK_COLUMNS]
    codes.append(_codes(both["taxon_id"].astype("str"), n_a))
    # a blank (code -1) is never shared: blanks of b get -2, so they equal no code of a
    codes = [(ca, np.where(cb < 0, -2, cb)) for ca, cb in codes]
    levels = list(range(1, len(RANK_COLUMNS) + 1)) + [_N_LEVELS]
    step = max(1, int(block_rows))
    same = None
    for start in range(0, n_a, step):
        rows = slice(start, min(n_a, start + step))
        shape = (rows.stop - rows.start, len(taxa_b))
        depth = np.zeros(shape, dtype=np.int8)
        if same is None or same.shape != shape:
            same = np.empty(shape, dtype=bool)
        for level, (ca, cb) in zip(levels, codes):
            np.equal(ca[rows][:, None], cb[None, :], out=same)
            np.copyto(depth, np.int8(level), where=same)
        yield rows, depth


def depth_distance(depth: np.ndarray, dtype=np.float64) -> np.ndarray:
    """Taxonomic distance ``(7 - depth) / 7`` from shared-rank depths (:func:`shared_rank_depth`)."""
    dtype = np.dtype(dtype)
    return (_N_LEVELS - depth.astype(dtype)) / dtype.type(_N_LEVELS)


def taxonomic_distance_matrix(taxa_a: pd.DataFrame, taxa_b: pd.DataFrame, *, dtype=np.float64,
                              fill_blanks: bool = True):
    """Taxonomic distance and lowest shared rank for every pair of taxa.

    Parameters
    ----------
    taxa_a, taxa_b : DataFrame
        Columns ``taxon_id`` and ``kingdom, phylum, class, order, family, genus``.
    dtype : numpy float dtype, default=numpy.float64
        Of the distance matrix (``numpy.float32`` halves memory for large tables).
    fill_blanks : bool, default=True
        Fill blank higher ranks first (see :func:`fill_higher_ranks`).

    Returns
    -------
    distance : ndarray, shape (len(taxa_a), len(taxa_b))
        ``(7 - depth) / 7`` where depth is the lowest shared level (see
        :func:`shared_rank_depth`): 0 same taxon, 1/7 same genus, ..., 1 nothing shared.
    shared_rank : ndarray of str, same shape
        Name of that level: ``'taxon'``, ``'genus'``, ..., ``'kingdom'`` or ``'root'``.

    Notes
    -----
    Rank levels are counted equally, a common practice for taxonomic distinctness
    measures built on Linnaean ranks (Clarke & Warwick 1998 use equal steps between
    levels). For very large tables call :func:`shared_rank_depth` and map depths
    yourself: the string array costs 28 bytes per pair.

    References
    ----------
    Clarke, K. R. & Warwick, R. M. (1998). A taxonomic distinctness index and its
    statistical properties. Journal of Applied Ecology 35, 523-531.
    """
    depth = shared_rank_depth(taxa_a, taxa_b, fill_blanks=fill_blanks)
    distance = depth_distance(depth, dtype)
    shared = np.asarray(RANK_LEVELS)[depth]
    return distance, shared
