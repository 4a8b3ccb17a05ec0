"""Generic numerics, free of paleontology vocabulary.

Each function is checked against a published example or a reference library
(see tests/stats). Public signatures here are a contract other code depends on.
"""
from __future__ import annotations

import importlib

# public name -> module that defines it (loaded on first use)
_EXPORTS = {
    # penalized logistic regression (Firth 1993; Heinze & Schemper 2002)
    "firth_logit": "firth", "FirthResult": "firth",
    # random-effects meta-analysis (DerSimonian & Laird 1986; REML; HKSJ)
    "pool_random_effects": "meta", "PooledResult": "meta",
    # Gower (1971) mixed-type distance with Podani (1999) ordinal handling
    "gower_distance": "gower",
    # Rubin (1987) rules for combining estimates over imputations / draws
    "rubin_combine": "rubin", "RubinResult": "rubin",
    # first passage of Brownian motion with drift (inverse Gaussian)
    "first_passage_probability": "passage",
    # Brownian excursions and hat-shape statistics
    "brownian_excursions": "excursion", "hat_shape": "excursion",
    # information criteria
    "aicc": "model_select", "akaike_weights": "model_select",
    # rank agreement
    "rank_agreement": "ranks", "top_k_overlap": "ranks", "RankAgreement": "ranks",
    # classification skill
    "roc_auc": "classify", "brier_score": "classify", "bootstrap_skill": "classify",
    # combining probabilities
    "logit_pool": "pooling", "rank_average": "pooling",
}

__all__ = sorted(_EXPORTS)


def __getattr__(name):
    if name in _EXPORTS:
        module = importlib.import_module(f"{__name__}.{_EXPORTS[name]}")
        return getattr(module, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def __dir__():
    return __all__
