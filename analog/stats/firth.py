"""Logistic regression by Firth's penalized likelihood, with profile intervals."""
from __future__ import annotations

import functools
import warnings
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy import linalg, optimize, special, stats

from analog.errors import AnalogError, AnalogWarning

__all__ = ["FirthResult", "firth_logit"]

_PENALTIES = ("firth", "none")
_CI_METHODS = ("profile", "wald")
_MAX_STEP = 5.0        # largest Newton step (logit units); keeps separated fits from overshooting
_MAX_HALVINGS = 30
_ETA_LIMIT = 30.0      # |linear predictor| beyond which an ML fit counts as separated
_PROFILE_LIMIT = 1e3   # beyond this distance from the estimate a profile bound is reported as +-inf


class _Singular(AnalogError):
    """The information matrix is not positive definite at the start values."""


class _NoBracket(AnalogError):
    """The profile deviance did not change sign between the bracket ends."""


@dataclass(frozen=True, eq=False)
class _Fit:
    beta: np.ndarray
    loglik: float          # penalized log-likelihood (plain one when penalty='none')
    cov: np.ndarray | None
    converged: bool
    n_iter: int


@dataclass(frozen=True, eq=False)
class FirthResult:
    """Result of :func:`firth_logit`.

    Attributes
    ----------
    params : ndarray, shape (p,)
        Coefficients on the logit scale.
    bse : ndarray, shape (p,)
        Standard errors, square roots of the diagonal of ``cov``.
    cov : ndarray, shape (p, p)
        Inverse Fisher information at ``params``.
    loglik : float
        Penalized log-likelihood ``l(b) + 0.5 log|I(b)|`` at ``params``
        (the ordinary log-likelihood when ``penalty='none'``).
    converged : bool
        Whether the Newton iterations met ``tol``.
    n_iter : int
        Newton iterations used.
    penalty : {'firth', 'none'}
        The penalty the fit used.
    n_obs : int
        Number of rows of ``X``.
    names : tuple of str
        Column names when ``X`` was a DataFrame (else empty); the default
        term names of ``summary_frame``.
    """

    params: np.ndarray
    bse: np.ndarray
    cov: np.ndarray
    loglik: float
    converged: bool
    n_iter: int
    penalty: str
    n_obs: int
    names: tuple = field(default=(), repr=False)
    _X: np.ndarray = field(default=None, repr=False)
    _y: np.ndarray = field(default=None, repr=False)
    _w: np.ndarray = field(default=None, repr=False)
    _max_iter: int = field(default=100, repr=False)
    _tol: float = field(default=1e-8, repr=False)
    _cache: dict = field(default_factory=dict, repr=False)

    def conf_int(self, alpha=0.05, method="profile"):
        """Confidence intervals for the coefficients.

        Parameters
        ----------
        alpha : float, default=0.05
            Intervals have nominal coverage ``1 - alpha``.
        method : {'profile', 'wald'}, default='profile'
            ``'profile'``: profile (penalized) likelihood intervals, the set of
            values ``b_j`` with ``2 (l*(b_hat) - l*_j(b_j)) <= chi2_1(1 - alpha)``
            where ``l*_j`` maximizes over the other coefficients with ``b_j``
            fixed (Heinze & Schemper 2002). ``'wald'``: ``b +- z se``.

        Returns
        -------
        ndarray, shape (p, 2)
            Lower and upper limits. A profile limit is ``-inf``/``inf`` when the
            profile does not fall to the cut-off within 1000 logit units of the
            estimate (the interval is unbounded on that side), and NaN (with an
            :class:`AnalogWarning`) when the fit did not converge or a
            constrained refit failed even with the QR factorization of
            ``W^1/2 X`` (fitted probabilities exactly 0 or 1 in double precision).
        """
        alpha = _check_alpha(alpha)
        if method not in _CI_METHODS:
            raise AnalogError(f"`method` was {method!r} but is expected to be in {set(_CI_METHODS)}")
        key = ("ci", alpha, method)
        if key not in self._cache:
            if method == "wald":
                z = stats.norm.isf(alpha / 2)
                ci = np.column_stack([self.params - z * self.bse, self.params + z * self.bse])
            else:
                q = stats.chi2.isf(alpha, 1)
                ci = np.full((self.params.size, 2), np.nan)
                if not self.converged:
                    warnings.warn("profile limits need a converged fit and this one did not "
                                  "converge; limits left as NaN (under separation use "
                                  "penalty='firth')", AnalogWarning, stacklevel=2)
                for j in range(self.params.size if self.converged else 0):
                    for side, direction in enumerate((-1.0, 1.0)):
                        try:
                            ci[j, side] = self._profile_limit(j, direction, q)
                        except (_Singular, _NoBracket) as exc:
                            warnings.warn(f"profile limit left as NaN: {exc}; "
                                          "method='wald' gives an interval", AnalogWarning,
                                          stacklevel=2)
            self._cache[key] = ci
        return self._cache[key].copy()

    def predict(self, X_new):
        """Predicted probabilities ``expit(X_new @ params)``.

        Parameters
        ----------
        X_new : array_like, shape (m, p) or (p,)
            Rows coded like the ``X`` of the fit (same columns, same intercept).

        Returns
        -------
        ndarray, shape (m,) (or a float for a single row)
        """
        Xn = np.asarray(X_new, dtype=float)
        if Xn.shape[-1] != self.params.size:
            raise AnalogError(f"`X_new` has {Xn.shape[-1]} columns but the fit has "
                              f"{self.params.size} coefficients")
        out = special.expit(Xn @ self.params)
        return float(out) if np.ndim(out) == 0 else out

    def lr_pvalues(self):
        """P-values of (penalized) likelihood ratio tests of ``b_j = 0``, one per coefficient.

        Each compares the fit with ``b_j`` fixed at 0 (other coefficients
        refitted) against the full fit on a chi-squared law with 1 degree of
        freedom (Heinze & Schemper 2002, sec. 2).
        """
        if "lr_p" not in self._cache:
            p = np.empty(self.params.size)
            for j in range(self.params.size):
                fit0 = self._constrained(j, 0.0, self.params)
                stat = np.nan if fit0 is None else max(2.0 * (self.loglik - fit0.loglik), 0.0)
                p[j] = stats.chi2.sf(stat, 1)
            self._cache["lr_p"] = p
        return self._cache["lr_p"].copy()

    def summary_frame(self, names=None, *, alpha=0.05, method="profile"):
        """Coefficient table.

        Parameters
        ----------
        names : sequence of str, optional
            Term names; default the column names of a DataFrame ``X``, else
            ``x0, x1, ...``.
        alpha : float, default=0.05
        method : {'profile', 'wald'}, default='profile'
            Interval method; also picks the p-value: the (penalized) likelihood
            ratio test for ``'profile'``, the Wald z test for ``'wald'``.

        Returns
        -------
        DataFrame
            Indexed by ``term`` with columns ``estimate, se, ci_low, ci_high,
            p_value, odds_ratio``.
        """
        p = self.params.size
        if names is None:
            names = self.names if len(self.names) == p else [f"x{j}" for j in range(p)]
        names = list(names)
        if len(names) != p:
            raise AnalogError(f"`names` has {len(names)} entries but the fit has {p} coefficients")
        ci = self.conf_int(alpha, method)
        if method == "profile":
            pval = self.lr_pvalues()
        else:
            with np.errstate(divide="ignore", invalid="ignore"):
                pval = 2.0 * stats.norm.sf(np.abs(self.params / self.bse))
        frame = pd.DataFrame({
            "estimate": self.params, "se": self.bse, "ci_low": ci[:, 0], "ci_high": ci[:, 1],
            "p_value": pval, "odds_ratio": np.exp(self.params)},
            index=pd.Index(names, name="term"))
        return frame

    # -- profile machinery -------------------------------------------------------------
    def _constrained(self, j, value, start, *, robust=False):
        """Fit with ``b_j`` fixed at ``value``; None if the information is singular there.

        ``robust`` lets the refit factorize an ill-conditioned information
        through a QR of ``W^1/2 X`` (see :func:`_qr_factor`).
        """
        free = np.ones(self.params.size, dtype=bool)
        free[j] = False
        for origin in (start, np.zeros_like(self.params)):
            beta0 = np.array(origin, dtype=float)
            beta0[j] = value
            try:
                return _newton(self._X, self._y, self._w, self.penalty == "firth", beta0, free,
                               self._max_iter, self._tol, want_cov=False, robust=robust)
            except _Singular:
                continue
        return None

    def _profile_limit(self, j, direction, q):
        """Where the profile deviance of b_j reaches the cut-off ``q``, on one side of the estimate.

        The quick search (:meth:`_profile_limit_secant`) is tried first. When
        one of its refits fails (the jump to the Wald guess can start a refit
        where fitted probabilities are saturated, so that ``X'WX`` is
        numerically singular) or it does not settle, the limit is searched
        again by :meth:`_profile_limit_outward`, which follows the profile
        from the estimate outward.
        """
        try:
            return self._profile_limit_secant(j, direction, q)
        except (_Singular, _NoBracket):
            return self._profile_limit_outward(j, direction, q)

    def _profile_limit_outward(self, j, direction, q):
        """Profile limit by refits stepping outward from the estimate, then Brent's method.

        The distance ``s = |b_j - b_hat_j|`` grows over 1/4, 1/2, 3/4 and 1 times
        the Wald distance ``sqrt(q) se_j``, then by a factor 1.5 per step; each
        refit starts from the constrained estimate of the previous (nearer)
        point, so the fits follow the profile path instead of starting where
        the fitted probabilities are saturated, and they factorize the
        information through a QR of ``W^1/2 X`` when ``X'WX`` is too
        ill-conditioned for Cholesky. The first step whose profile deviance
        reaches ``q`` brackets the limit, and :func:`scipy.optimize.brentq`
        finds the root of ``deviance(s) - q`` inside the bracket. When the
        deviance stays below ``q`` up to 1000 logit units from the estimate
        the interval is unbounded on that side (``-inf``/``inf``).
        """
        b_hat = self.params[j]
        path = {0.0: self.params}     # distance -> constrained estimate, for warm starts
        seen = {}

        def excess(s):
            """Profile deviance at distance s minus the cut-off (< 0 inside the interval)."""
            if s not in seen:
                start = path[max(k for k in path if k <= s)]
                fit = self._constrained(j, b_hat + direction * s, start, robust=True)
                if fit is None:
                    raise _Singular(f"the fit with coefficient {j} fixed at "
                                    f"{b_hat + direction * s:.6g} has a singular information "
                                    "matrix")
                if not np.isfinite(fit.loglik):
                    raise _NoBracket(f"the fit with coefficient {j} fixed at "
                                     f"{b_hat + direction * s:.6g} has no finite likelihood")
                path[s] = fit.beta
                seen[s] = 2.0 * (self.loglik - fit.loglik) - q
            return seen[s]

        scale = self.bse[j] if np.isfinite(self.bse[j]) and self.bse[j] > 0 else 1.0
        wald = np.sqrt(q) * scale
        inner, s = 0.0, 0.25 * wald
        while True:
            if s > _PROFILE_LIMIT:
                return direction * np.inf
            if excess(s) >= 0.0:
                break
            inner = s
            s = s + 0.25 * wald if s < wald else 1.5 * s
        # xtol: about the accuracy of the refits (Newton steps below tol = 1e-8 by default)
        try:
            dist = optimize.brentq(excess, inner, s, xtol=1e-10, rtol=1e-12, maxiter=200)
        except RuntimeError as exc:    # brentq did not converge in maxiter
            raise _NoBracket(f"the profile limit of coefficient {j} did not settle") from exc
        return b_hat + direction * dist

    def _profile_limit_secant(self, j, direction, q):
        """Where the signed root of the profile deviance reaches sqrt(q), on one side of b_j.

        Works on the distance ``s = |b_j - b_hat_j|``. The signed root is close
        to linear in ``s``, so secant predictions from the Wald guess usually
        bracket the limit within two or three refits; an Illinois regula falsi
        then finishes inside the bracket.
        """
        b_hat = self.params[j]
        root_q = np.sqrt(q)
        warm = [self.params]
        seen = {0.0: -root_q}

        def excess(s):
            """Signed root of the profile deviance minus its cut-off (< 0 inside)."""
            if s not in seen:
                fit = self._constrained(j, b_hat + direction * s, warm[0])
                if fit is None:
                    raise _Singular(f"the fit with coefficient {j} fixed at "
                                    f"{b_hat + direction * s:.6g} has a singular information "
                                    "matrix")
                warm[0] = fit.beta
                seen[s] = np.sqrt(max(2.0 * (self.loglik - fit.loglik), 0.0)) - root_q
            return seen[s]

        scale = self.bse[j] if np.isfinite(self.bse[j]) and self.bse[j] > 0 else 1.0
        inner, outer = 0.0, None
        s = root_q * scale                      # Wald guess
        for _ in range(60):
            if s > _PROFILE_LIMIT:
                return direction * np.inf
            if excess(s) >= 0:
                outer = s
                break
            inner = s
            # secant through the two farthest inside points, overshooting slightly
            known = sorted(k for k in seen if seen[k] < 0)
            s0, s1 = known[-2], known[-1]
            slope = (seen[s1] - seen[s0]) / (s1 - s0)
            guess = s1 - seen[s1] / slope if slope > 0 else np.inf
            s = 1.002 * guess if s1 < guess < 4.0 * s1 else 2.0 * s1
        if outer is None:
            return direction * np.inf
        # Illinois-type regula falsi inside the bracket: superlinear on a near-linear
        # function, and stops on the size of the excess rather than the bracket width
        f_in, f_out = seen[inner], seen[outer]
        side = 0
        dist = outer
        for _ in range(100):
            dist = inner - f_in * (outer - inner) / (f_out - f_in)
            f = excess(dist)
            # 1e-8 on the signed-root scale: about the accuracy of the refits themselves
            if abs(f) <= 1e-8 or outer - inner <= 1e-12 * (1.0 + outer):
                break
            if f < 0:
                inner, f_in = dist, f
                if side == -1:
                    f_out /= 2.0
                side = -1
            else:
                outer, f_out = dist, f
                if side == 1:
                    f_in /= 2.0
                side = 1
        else:
            raise _NoBracket(f"the profile limit of coefficient {j} did not settle")
        return b_hat + direction * dist


def _check_alpha(alpha):
    alpha = float(alpha)
    if not 0.0 < alpha < 1.0:
        raise AnalogError(f"`alpha` must be in (0, 1); got {alpha} instead")
    return alpha


@functools.lru_cache(maxsize=64)
def _pairs(p):
    """Upper-triangle index pairs of a p x p matrix and their weights (2 off the diagonal)."""
    rows, cols = np.triu_indices(p)
    return rows, cols, np.where(rows == cols, 1.0, 2.0)


def _cholesky(info):
    """Lower Cholesky factor of ``info`` and its inverse; None if that fails."""
    try:
        # numpy's small-matrix routines: scipy.linalg's per-call overhead dominates at p ~ 10
        chol = np.linalg.cholesky(info)
        chol_inv = np.linalg.inv(chol)
    except np.linalg.LinAlgError:
        return None
    if not ((chol.diagonal() > 0).all() and np.isfinite(chol_inv).all()):
        return None
    return chol, chol_inv


def _qr_factor(X, v):
    """Lower factor ``L`` with ``L L' = X' diag(v) X`` from a QR of ``diag(v)^1/2 X``, and ``L^-1``.

    Forming ``X'WX`` squares the condition number: a row with ``v ~ 1e-19``
    (``|x'b| ~ 44``) next to rows with ``v ~ 0.1`` leaves the product
    numerically indefinite and its Cholesky factorization fails, although
    the information is positive definite. Householder QR works on
    ``W^1/2 X`` itself (condition ~1e10 there), so ``log|I|`` (from the
    diagonal of R) and the leverages stay accurate. Returns None when a
    diagonal element of R is zero (weights that underflowed to 0 leave
    fewer informative rows than columns) or the inverse is not finite.
    """
    n, p = X.shape
    if n < p:
        return None
    r = np.linalg.qr(X * np.sqrt(v)[:, None], mode="r")
    diag = r.diagonal()
    if not (np.all(np.isfinite(r)) and np.all(diag != 0.0)):
        return None
    chol = (r * np.sign(diag)[:, None]).T     # lower triangular, positive diagonal
    chol_inv = linalg.solve_triangular(chol, np.eye(p), lower=True)
    if not np.isfinite(chol_inv).all():
        return None
    return chol, chol_inv


def _evaluate(X, y, w, beta, firth, free, exact, all_free=False, robust=False):
    """(Penalized) log-likelihood, Newton step and inverse Cholesky factor at beta.

    Returns None when the information matrix is not positive definite. With
    ``robust``, a Cholesky factorization of ``X'WX`` that fails is replaced
    by a QR factorization of ``W^1/2 X`` (:func:`_qr_factor`), which
    tolerates tiny weights ``p(1-p)``.
    """
    eta = X @ beta
    prob = special.expit(eta)
    comp = special.expit(-eta)   # 1 - prob without cancellation: stays positive up to |eta| ~ 700
    # written with logaddexp so that |eta| in the hundreds stays finite
    loglik = float(np.sum(w * (y * eta - np.logaddexp(0.0, eta))))
    v = w * prob * comp
    info = (X * v[:, None]).T @ X
    factors = _cholesky(info)
    if factors is None and robust:
        factors = _qr_factor(X, v)
        if factors is not None:
            info = factors[0] @ factors[0].T
    if factors is None:
        return None
    chol, chol_inv = factors
    diag = chol.diagonal()
    resid = w * (y * comp - (1.0 - y) * prob)   # y - prob, exact for y in {0, 1}
    if firth:
        # z_i = L^-1 x_i; leverages h_i = v_i |z_i|^2 as row sums, never the n x n hat matrix
        z = X @ chol_inv.T
        q = np.einsum("ij,ij->i", z, z)
        h = v * q
        resid = resid + h * (0.5 - prob)
        loglik += float(np.sum(np.log(diag)))        # 0.5 * log|I| = sum(log diag(chol))
    score = X.T @ resid
    if firth and exact:
        # exact Hessian of 0.5 log|I(b)|: 0.5 (A - B) with
        # A_rs = sum_i v_i (1 - 6p_i + 6p_i^2) q_i x_ir x_is and
        # B_rs = tr(I^-1 dI/db_r I^-1 dI/db_s) = sum_ab M_r,ab M_s,ab,
        # M_r,ab = sum_i v_i (1 - 2p_i) x_ir z_ia z_ib   (O(n p^3), no n x n matrix)
        d2 = v * (1.0 - 6.0 * prob * comp) * q
        a_term = (X * d2[:, None]).T @ X
        # M is symmetric in (a, b): keep a <= b and count off-diagonal pairs twice
        rows, cols, pair_weight = _pairs(z.shape[1])
        m_term = (X * (v * (comp - prob))[:, None]).T @ (z[:, rows] * z[:, cols])
        curvature = info - 0.5 * (a_term - (m_term * pair_weight) @ m_term.T)
        step = _newton_step(curvature, info, score, free, all_free=all_free, info_chol=chol,
                            robust=robust)
    elif all_free:
        step = _solve_chol(chol, score)   # Fisher scoring with the factor already at hand
    else:
        step = _newton_step(info, info, score, free, info_chol=chol, robust=robust)
    if step is None:
        return None
    return loglik, step, chol_inv


def _solve_chol(chol, rhs):
    """``A^-1 rhs`` from the Cholesky factor of A; None if not finite."""
    step = np.linalg.solve(chol.T, np.linalg.solve(chol, rhs))
    return step if np.isfinite(step).all() else None


def _newton_step(curvature, info, score, free, *, all_free=False, info_chol=None, robust=False):
    """Solve on the free coordinates with the exact curvature, or the information if that fails.

    The penalized objective is not concave everywhere; where its curvature is
    not positive definite the Fisher-scoring step of Heinze & Schemper (2002)
    is taken instead. With every coordinate free, ``info_chol`` (the factor of
    ``info``) saves factorizing it again. With ``robust``, when the free block
    of ``info`` is too ill-conditioned for a Cholesky factorization, the
    Fisher step is solved from a QR factorization of the free rows of
    ``info_chol`` (``info_ff = B B'`` with ``B = L[free, :]``).
    """
    if all_free and info_chol is not None:
        try:
            step = _solve_chol(np.linalg.cholesky(curvature), score)
        except np.linalg.LinAlgError:
            step = None
        return step if step is not None else _solve_chol(info_chol, score)
    idx = np.ix_(free, free)
    step = np.zeros_like(score)
    for matrix in (curvature, info):
        try:
            chol = np.linalg.cholesky(matrix[idx])
        except np.linalg.LinAlgError:
            continue
        step[free] = np.linalg.solve(chol.T, np.linalg.solve(chol, score[free]))
        if np.all(np.isfinite(step)):
            return step
    if robust and info_chol is not None:
        r = np.linalg.qr(info_chol[free, :].T, mode="r")
        if np.all(r.diagonal() != 0.0):
            half = linalg.solve_triangular(r, score[free], trans="T")
            step[free] = linalg.solve_triangular(r, half)
            if np.all(np.isfinite(step)):
                return step
    return None


def _newton(X, y, w, firth, beta0, free, max_iter, tol, *, want_cov=True, robust=False):
    """Newton-Raphson on the (modified) score with step-halving on the (penalized) log-likelihood.

    Steps start as Fisher scoring (``I^-1 U*``), which is cheap and usually
    fast. When, after three steps, a step shrinks by less than a factor 4, or
    when a step needed halving, the iterations switch to the exact Hessian of
    the penalized objective, which converges quadratically where Fisher
    scoring crawls (near separation). ``robust`` is passed to
    :func:`_evaluate` (QR fallback when the information is ill-conditioned).
    """
    beta = beta0.copy()
    exact = False
    all_free = bool(free.all())
    state = _evaluate(X, y, w, beta, firth, free, exact, all_free, robust)
    if state is None:
        raise _Singular("the information matrix is singular at the start values; "
                        "X is probably rank deficient (drop or merge collinear columns)")
    converged = False
    n_iter = 0
    previous = np.inf
    while True:
        loglik, step, _ = state
        biggest = np.max(np.abs(step), initial=0.0)
        if biggest <= tol:
            converged = True
            break
        if n_iter >= max_iter:
            break
        if firth and not exact and n_iter >= 3 and biggest > 0.25 * previous:
            exact = True
            state = _evaluate(X, y, w, beta, firth, free, exact, all_free, robust)
            loglik, step, _ = state
            biggest = np.max(np.abs(step), initial=0.0)
        previous = biggest
        if biggest > _MAX_STEP:
            step = step * (_MAX_STEP / biggest)
        for halvings in range(_MAX_HALVINGS):
            trial = beta + step
            new = _evaluate(X, y, w, trial, firth, free, exact, all_free, robust)
            if new is not None and new[0] >= loglik - 1e-10 * (1.0 + abs(loglik)):
                break
            step = step / 2.0
        else:
            break   # no step improves the objective: stop, not converged
        if halvings and firth and not exact:
            exact = True
            new = _evaluate(X, y, w, trial, firth, free, exact, all_free, robust)
        beta, state = trial, new
        n_iter += 1
    cov = None
    if want_cov:
        chol_inv = state[2]
        cov = chol_inv.T @ chol_inv
    return _Fit(beta, state[0], cov, bool(converged), n_iter)


def _check_rank(X, w):
    """Reject a design whose weighted columns are (numerically) linearly dependent."""
    gram = (X * w[:, None]).T @ X
    scale = np.sqrt(np.diag(gram))
    ok = scale > 0
    if ok.all():
        # eigenvalues of the correlation-scaled Gram matrix: cheap at p ~ 10, unlike an SVD of X
        eig = np.linalg.eigvalsh(gram / np.outer(scale, scale))
        ok = eig > 1e-12 * X.shape[1]
    if not ok.all():
        rank = np.linalg.matrix_rank(X[w > 0])
        raise AnalogError(f"`X` is rank deficient (rank {rank} < {X.shape[1]} columns among rows "
                          "with positive weight); drop or merge the collinear columns")


def firth_logit(X, y, *, penalty="firth", max_iter=100, tol=1e-8, weights=None, start=None):
    """Logistic regression by Firth's penalized likelihood (or ordinary ML).

    Parameters
    ----------
    X : array_like, shape (n, p)
        Design matrix, already holding any intercept column. A DataFrame's
        column names become the default term names.
    y : array_like, shape (n,)
        Outcomes coded 0/1 (or booleans).
    penalty : {'firth', 'none'}, default='firth'
        ``'firth'`` maximizes ``l(b) + 0.5 log|I(b)|`` (Jeffreys-prior
        penalty); ``'none'`` is ordinary maximum likelihood.
    max_iter : int, default=100
        Largest number of Newton iterations.
    tol : float, default=1e-8
        Convergence when the largest Newton step is at most ``tol``.
    weights : array_like, shape (n,), optional
        Non-negative case (frequency) weights; integer weights give the same
        fit as repeating rows.
    start : array_like, shape (p,), optional
        Starting coefficients (default zeros), e.g. the estimates of a related
        fit, which saves iterations. A start where the information matrix is
        singular is replaced by zeros. Caution: in sparse data (few events,
        many columns) the penalized likelihood can have more than one local
        maximum, and a fit from another start can end at another one; the
        default start (zeros) gives reproducible results.

    Returns
    -------
    FirthResult
        ``params``, ``bse``, ``cov``, ``loglik`` and the methods
        ``conf_int(alpha=0.05, method='profile')``, ``predict(X_new)``,
        ``lr_pvalues()`` and ``summary_frame(names=None)``.

    Raises
    ------
    AnalogError
        Bad shapes, values outside {0, 1}, negative or non-finite weights,
        non-finite X, or a rank-deficient X.

    Warns
    -----
    AnalogWarning
        When the iterations stop before converging, or (``penalty='none'``)
        when fitted probabilities are numerically 0 or 1 (``|x'b| > 30``),
        the sign of separation, where the ML estimates do not exist. The last
        iterate is returned with ``converged=False``.

    Notes
    -----
    With ``p_i = expit(x_i' b)``, ``W = diag(w_i p_i (1 - p_i))`` and
    ``I(b) = X'WX``, Firth's modified score is
    ``U*(b) = X' (w (y - p) + h (1/2 - p))`` where ``h`` are the diagonal
    elements of ``W^1/2 X I^-1 X' W^1/2``, computed row by row from the
    Cholesky factor of ``I`` (O(n p^2)). Iterations start as
    ``b <- b + I(b)^-1 U*(b)`` (Heinze & Schemper 2002); when these slow
    down (typical near separation) they switch to full Newton steps with the
    exact Hessian of the penalized log-likelihood, whose penalty part is
    computed in O(n p^3) without an n x n matrix. Each step is capped at 5
    logit units and halved until the penalized log-likelihood does not
    decrease. The estimates are finite under complete and quasi-complete
    separation (Kosmidis & Firth 2021). Standard errors are
    ``sqrt(diag(I(b)^-1))``, as in Heinze & Schemper (2002). Profile
    intervals refit the model with one coefficient fixed, keeping the
    penalty of the full information matrix, and find the cut-off on the
    signed root of the profile deviance by secant steps from the Wald guess
    and a regula falsi inside the bracket. In very sparse designs the Wald
    guess can lie where some fitted probabilities saturate (``p(1-p)`` ~
    1e-19) and ``X'WX`` cannot be Cholesky-factorized; the limit is then
    searched again by refits stepping outward from the estimate, each started
    from the previous one and factorizing the information through a QR of
    ``W^1/2 X`` when needed, with :func:`scipy.optimize.brentq` on the
    profile deviance minus the cut-off once a step passes it.

    References
    ----------
    Firth, D. (1993). Bias reduction of maximum likelihood estimates.
    Biometrika 80, 27-38.

    Heinze, G. & Schemper, M. (2002). A solution to the problem of separation
    in logistic regression. Statistics in Medicine 21, 2409-2419.

    Kosmidis, I. & Firth, D. (2021). Jeffreys-prior penalty, finiteness and
    shrinkage in binomial-response generalized linear models. Biometrika
    108, 71-82.
    """
    if penalty not in _PENALTIES:
        raise AnalogError(f"`penalty` was {penalty!r} but is expected to be in {set(_PENALTIES)}")
    names = tuple(str(c) for c in X.columns) if isinstance(X, pd.DataFrame) else ()
    Xa = np.asarray(X, dtype=float)
    if Xa.ndim != 2:
        raise AnalogError(f"`X` must be 2-D (n rows, p columns); got {Xa.ndim}-D instead. "
                          "Reshape a single column with X.reshape(-1, 1)")
    n, p = Xa.shape
    if n == 0 or p == 0:
        raise AnalogError(f"`X` must have at least one row and one column; got shape {Xa.shape}")
    if not np.all(np.isfinite(Xa)):
        raise AnalogError("`X` holds NaN or infinite values; drop or impute those rows first")
    ya = np.asarray(y, dtype=float).reshape(-1)
    if ya.size != n:
        raise AnalogError(f"`y` has {ya.size} values but `X` has {n} rows")
    if not np.all((ya == 0) | (ya == 1)):
        raise AnalogError("`y` must hold only 0 and 1 (no NaN); found other values")
    if weights is None:
        wa = np.ones(n)
    else:
        wa = np.asarray(weights, dtype=float).reshape(-1)
        if wa.size != n:
            raise AnalogError(f"`weights` has {wa.size} values but `X` has {n} rows")
        if not np.all(np.isfinite(wa) & (wa >= 0)):
            raise AnalogError("`weights` must be finite and non-negative")
    max_iter = int(max_iter)
    if max_iter < 1:
        raise AnalogError(f"`max_iter` must be a positive integer; got {max_iter} instead")
    tol = float(tol)
    if not tol > 0:
        raise AnalogError(f"`tol` must be positive; got {tol} instead")

    if start is None:
        beta0 = np.zeros(p)
    else:
        beta0 = np.asarray(start, dtype=float).reshape(-1)
        if beta0.size != p:
            raise AnalogError(f"`start` has {beta0.size} values but `X` has {p} columns")
        if not np.all(np.isfinite(beta0)):
            raise AnalogError("`start` holds NaN or infinite values")

    _check_rank(Xa, wa)
    free = np.ones(p, dtype=bool)
    try:
        fit = _newton(Xa, ya, wa, penalty == "firth", beta0, free, max_iter, tol)
    except _Singular:
        if start is None:
            raise
        # fitted probabilities saturated at the start: begin again from zeros
        fit = _newton(Xa, ya, wa, penalty == "firth", np.zeros(p), free, max_iter, tol)
    converged = fit.converged
    hint = ""
    if penalty == "none":
        hint = " Under separation the ML estimates do not exist; use penalty='firth'."
        # ML under separation drifts until the steps vanish in rounding: flag fitted
        # probabilities within 1e-13 of 0 or 1 (|eta| > 30) as a failed fit
        if converged and np.any(np.abs(Xa[wa > 0] @ fit.beta) > _ETA_LIMIT):
            converged = False
            warnings.warn("ML fit reached fitted probabilities numerically 0 or 1; reported as "
                          f"not converged.{hint}", AnalogWarning, stacklevel=2)
    if not fit.converged:
        warnings.warn(f"logistic fit (penalty={penalty!r}) did not converge in {fit.n_iter} "
                      f"iterations; returning the last iterate.{hint}", AnalogWarning, stacklevel=2)
    bse = np.sqrt(np.clip(np.diag(fit.cov), 0.0, None))
    return FirthResult(params=fit.beta, bse=bse, cov=fit.cov, loglik=fit.loglik,
                       converged=converged, n_iter=fit.n_iter, penalty=penalty, n_obs=n,
                       names=names, _X=Xa, _y=ya, _w=wa, _max_iter=max_iter, _tol=tol)
