"""Expected loss of taxonomic diversity on the rank tree (after Faith 2008)."""
from __future__ import annotations

import networkx as nx
import numpy as np
import scipy.sparse as sp

from .._blas import one_blas_thread
from ..engine import engine_scope, split_counts

__all__ = ["branch_incidence", "expected_diversity_loss"]


def branch_incidence(tree: nx.DiGraph, taxon_ids) -> tuple[sp.csr_matrix, list]:
    """Which taxa sit below each branch of a rooted tree.

    Parameters
    ----------
    tree : networkx.DiGraph
        Edges point from parent to child (root -> ... -> taxon). A taxon's node is the node named
        by its taxon_id, or the node whose ``taxon_id`` attribute equals it.
    taxon_ids : sequence of str

    Returns
    -------
    incidence : scipy.sparse.csr_matrix, shape (n_branches, n_taxa)
        ``incidence[b, i] = 1`` when taxon ``i`` lies below branch ``b``. Each non-root node
        carries one branch, the edge from its parent; roots (no parent) carry none.
    branches : list
        The node below each branch, in row order.

    Raises
    ------
    KeyError
        When a taxon has no node in the tree.
    """
    by_attr = {str(d["taxon_id"]): n for n, d in tree.nodes(data=True) if "taxon_id" in d}
    branches = [n for n in tree.nodes if tree.in_degree(n) > 0]
    row_of = {n: i for i, n in enumerate(branches)}
    rows, cols = [], []
    for j, t in enumerate(taxon_ids):
        node = by_attr.get(str(t), t if t in tree else None)
        if node is None:
            raise KeyError(f"taxon '{t}' is not in the rank tree")
        for n in nx.ancestors(tree, node) | {node}:
            if n in row_of:
                rows.append(row_of[n])
                cols.append(j)
    data = np.ones(len(rows), dtype=float)
    inc = sp.csr_matrix((data, (rows, cols)), shape=(len(branches), len(taxon_ids)))
    return inc, branches


def expected_diversity_loss(incidence: sp.csr_matrix, present: np.ndarray, p: np.ndarray, *,
                            lengths: np.ndarray | None = None, engine=None) -> np.ndarray:
    """Expected branch length lost from each region's tree.

    Parameters
    ----------
    incidence : sparse matrix, shape (n_branches, n_taxa)
        From :func:`branch_incidence`.
    present : bool array or sparse matrix, shape (n_taxa, n_regions)
        Taxa present (and assessed) in each region.
    p : array, shape (n_taxa,) or (n_taxa, n_draws)
        Probability each taxon is lost.
    lengths : array, shape (n_branches,), optional
        Branch lengths; unit length per branch when omitted.
    engine : {'local', 'dask'} or analog.engine.Engine, optional
        Where the blocks of regions are computed (default: in this process); results are
        identical.

    Returns
    -------
    ndarray, shape (n_regions,) or (n_regions, n_draws)
        ``Σ_b L_b Π_{i below b, present} p_i`` over the branches with at least one present taxon
        below them.

    Notes
    -----
    A region's tree is the part of the rank tree spanned by the taxa present there. A branch is
    lost when every taxon below it is lost; with losses independent its loss probability is the
    product of their probabilities, and the expected loss of tree length is the sum over
    branches (Faith 2008, the complement of expected phylogenetic diversity). Taxa absent from
    the region do not protect its branches. The products are taken as sums of logs.
    :func:`expected_diversity_losses` computes several probability arrays in one pass.

    References
    ----------
    Faith, D. P. (2008). Threatened species and the potential loss of phylogenetic diversity:
    conservation scenarios based on estimated extinction probabilities and phylogenetic risk
    analysis. Conservation Biology 22, 1461-1470.
    """
    return expected_diversity_losses(incidence, present, [p], lengths=lengths, engine=engine)[0]


def expected_diversity_losses(incidence: sp.csr_matrix, present: np.ndarray, ps, *,
                              lengths: np.ndarray | None = None, engine=None) -> list[np.ndarray]:
    """:func:`expected_diversity_loss` for each probability array of ``ps``, in one pass over the regions.

    Each region's tree (the branches its taxa span) is worked out once for all of ``ps``; the
    numbers are the same as from separate calls.

    Notes
    -----
    A branch with a single present taxon below it has that taxon's probability as its loss
    probability; those come from one exponentiation of every taxon's log-probabilities, shared
    by all regions. Branches with two or more present taxa sum their taxa's log-probabilities
    (in taxon order, as a sparse product adds them) and exponentiate per region.
    """
    arrays = []
    for p in ps:
        p = np.asarray(p, dtype=float)
        arrays.append((p[:, None] if p.ndim == 1 else p, p.ndim == 1))
    present = sp.csc_matrix(present, dtype=float)
    n_regions = present.shape[1]
    lengths = np.ones(incidence.shape[0]) if lengths is None else np.asarray(lengths, dtype=float)
    logps, exps = [], []
    for p, _ in arrays:
        with np.errstate(divide="ignore"):
            logp = np.nan_to_num(np.log(np.clip(p, 0.0, 1.0)), neginf=-1e300)  # p = 0: the branch certainly survives
        logps.append(logp)
        exps.append(np.exp(logp))
    below = sp.csr_matrix(incidence).T.tocsr()      # taxa x branches: the branches above each taxon
    blocks = split_counts(n_regions, _REGIONS_PER_CHUNK)
    with engine_scope(engine) as eng:
        parts = eng.map(_loss_block, blocks, shared=(below, present, logps, exps, lengths))
    out = []
    for j, (p, squeeze) in enumerate(arrays):
        res = np.vstack([part[j] for part in parts]) if parts else np.zeros((0, p.shape[1]))
        out.append(res[:, 0] if squeeze else res)
    return out


_REGIONS_PER_CHUNK = 50


def _loss_block(block, shared) -> list[np.ndarray]:
    """Expected loss for the regions ``block = (start, stop)``, one array per probability array:
    one sparse product per region, over the branches its taxa span."""
    below, present, logps, exps, lengths = shared
    start, stop = block
    outs = [np.zeros((stop - start, logp.shape[1])) for logp in logps]
    with one_blas_thread():  # small products: threads cost more than they save (analog._blas)
        _loss_regions(range(start, stop), below, present, logps, exps, lengths, outs)
    return outs


def _loss_regions(regions, below, present, logps, exps, lengths, outs) -> None:
    for k, r in enumerate(regions):
        lo, hi = present.indptr[r], present.indptr[r + 1]
        idx = present.indices[lo:hi][present.data[lo:hi] != 0]
        if not len(idx):
            continue
        sub = below[idx]
        branches, col = _codes(sub.indices)
        # branches x taxa of this region; rows list their taxa in ascending order
        per_branch = sp.csr_matrix((sub.data, col, sub.indptr), shape=(len(idx), len(branches))).T.tocsr()
        count = np.diff(per_branch.indptr)
        first = per_branch.indptr[:-1]
        one = (count == 1) & (per_branch.data[np.minimum(first, max(per_branch.nnz - 1, 0))] == 1.0)
        single = np.flatnonzero(one)
        multi = np.flatnonzero(~one)
        source = np.zeros(len(branches), dtype=np.int64)   # each lone taxon's row of the shared exponentials
        source[single] = idx[per_branch.indices[first[single]]]
        several = per_branch[multi]
        weights = lengths[branches]
        for out, logp, e in zip(outs, logps, exps):
            # log of a branch's loss probability: 0 + 1 * log p of a lone taxon is log p itself
            prob = e.take(source, axis=0)
            prob[multi] = np.exp(several @ logp[idx])
            out[k] = weights @ prob


def _codes(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Sorted distinct values and each value's position among them."""
    order = np.argsort(values, kind="stable")
    s = values[order]
    new = np.r_[True, s[1:] != s[:-1]] if len(s) else np.zeros(0, dtype=bool)
    codes = np.empty(len(values), dtype=np.int64)
    codes[order] = np.cumsum(new) - 1
    return s[new], codes
