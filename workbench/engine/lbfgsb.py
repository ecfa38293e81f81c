"""A box-bounded limited-memory BFGS minimiser vectorised over independent problems.

Each of ``B`` problems keeps its own iterate, memory, step length and counters; one call of
the objective evaluates every problem that still needs a value, so B small problems cost about
as many numpy calls as one. Problem ``i``'s path depends only on its own values, so it is the
same whatever else is in the batch.

Per iteration (Nocedal & Wright 2006, Algorithm 7.4 and eq. 7.20; projection as in Byrd, Lu,
Nocedal & Zhu 1995):

1. variables at a bound whose gradient points outwards are held; the direction is
   ``d = −H g`` on the others, ``H`` from the two-loop recursion over the last ``memory``
   pairs ``(s, y)`` scaled by ``γ = sᵀy / yᵀy``; if ``d`` is not a descent direction the
   memory is dropped and ``d = −g`` (projected);
2. projected backtracking: ``x⁺ = clip(x + α d)`` with ``α = 1`` (``min(1, 1/‖d‖)`` without
   memory), shortened by quadratic interpolation (to between a tenth and a half) until
   ``f(x⁺) ≤ f(x) + c₁ gᵀ(x⁺ − x)``;
3. the pair is stored when ``sᵀy > ε yᵀy`` (curvature condition).

A problem stops when its projected gradient is below ``pgtol`` (infinity norm), its relative
reduction is below ``factr·ε`` (scipy's ``fmin_l_bfgs_b`` defaults), or it reaches its
``maxiter`` iterations or ``maxfun`` evaluations. The best point seen is returned.

:func:`minimise_driven` runs scipy's own L-BFGS-B instead, through its private driver
``scipy.optimize._lbfgsb.setulb``, whose argument list is the one of scipy's C port (1.15 and
later). It is used only after :func:`scipy_driver_usable` has found that driver's documented
signature and checked it on a one-dimensional quadratic whose minimiser is known; otherwise
(an older or a future scipy) the same problems go to :func:`minimise`, with a warning logged
once per process.
"""

from __future__ import annotations

import functools
import logging
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

__all__ = ["BatchResult", "minimise", "minimise_driven", "scipy_driver_usable"]

log = logging.getLogger(__name__)

_EPS = np.finfo(float).eps
_ARMIJO = 1e-4
_MAX_HALVINGS = 20


@dataclass(frozen=True)
class BatchResult:
    """Per problem: best point and value seen, iterations and evaluations spent."""

    x: np.ndarray  # (B, q)
    fun: np.ndarray  # (B,)
    nit: np.ndarray  # (B,)
    nfev: np.ndarray  # (B,)


def _two_loop(
    g: np.ndarray, S: np.ndarray, Y: np.ndarray, rho: np.ndarray, used: int
) -> np.ndarray:
    """``H g`` for each row by the two-loop recursion; unused memory slots are zero
    (``rho = 0``), which leaves them without effect. Slot ``-1`` is the newest; only the last
    ``used`` slots are visited."""
    q = g.copy()
    m = S.shape[1]
    first = m - max(used, 1)
    a = np.zeros((len(g), m))
    for j in range(m - 1, first - 1, -1):
        a[:, j] = rho[:, j] * np.einsum("ij,ij->i", S[:, j], q)
        q -= a[:, j, None] * Y[:, j]
    sy = np.einsum("ij,ij->i", S[:, -1], Y[:, -1])
    yy = np.einsum("ij,ij->i", Y[:, -1], Y[:, -1])
    gamma = np.where((rho[:, -1] > 0) & (yy > 0), sy / np.where(yy > 0, yy, 1.0), 1.0)
    r = gamma[:, None] * q
    for j in range(first, m):
        b = rho[:, j] * np.einsum("ij,ij->i", Y[:, j], r)
        r += S[:, j] * (a[:, j] - b)[:, None]
    return r


def minimise(
    fun: Callable[[np.ndarray, np.ndarray], tuple[np.ndarray, np.ndarray]],
    x0: np.ndarray,
    lower: np.ndarray,
    upper: np.ndarray,
    *,
    maxiter: int | np.ndarray,
    maxfun: int | np.ndarray,
    memory: int = 10,
    pgtol: float = 1e-5,
    factr: float = 1e7,
) -> BatchResult:
    """Minimise ``B`` box-bounded problems at once.

    ``fun(X, idx)`` returns values ``(k,)`` and gradients ``(k, q)`` at the rows ``X`` of the
    problems ``idx``; a non-finite value marks a failed evaluation (the step is shortened).
    ``lower``/``upper`` broadcast to ``(B, q)``; ``maxiter``/``maxfun`` may differ per problem.
    """
    x = np.array(x0, dtype=float, ndmin=2)
    B, q = x.shape
    lo = np.broadcast_to(np.asarray(lower, dtype=float), (B, q))
    hi = np.broadcast_to(np.asarray(upper, dtype=float), (B, q))
    maxiter = np.broadcast_to(np.asarray(maxiter, dtype=int), (B,))
    maxfun = np.broadcast_to(np.asarray(maxfun, dtype=int), (B,))
    x = np.clip(x, lo, hi)
    everyone = np.arange(B)
    f, g = fun(x, everyone)
    f = np.where(np.isfinite(f), f, np.inf)
    g = np.where(np.isfinite(g), g, 0.0)
    nfev = np.ones(B, dtype=int)
    nit = np.zeros(B, dtype=int)
    best_x, best_f = x.copy(), f.copy()
    S = np.zeros((B, memory, q))
    Y = np.zeros((B, memory, q))
    rho = np.zeros((B, memory))
    stored = np.zeros(B, dtype=int)

    def projected_gradient(i):
        return np.clip(x[i] - g[i], lo[i], hi[i]) - x[i]

    active = np.isfinite(f) & (nfev < maxfun) & (maxiter > 0)
    active &= np.abs(projected_gradient(everyone)).max(axis=1) > pgtol
    while active.any():
        idx = np.flatnonzero(active)
        xi, gi = x[idx], g[idx]
        held = ((xi <= lo[idx]) & (gi > 0)) | ((xi >= hi[idx]) & (gi < 0))
        gf = np.where(held, 0.0, gi)
        d = -_two_loop(gf, S[idx], Y[idx], rho[idx], int(stored[idx].max()))
        d[held] = 0.0
        slope = np.einsum("ij,ij->i", gi, d)
        bad = ~(slope < 0)
        if bad.any():
            rho[idx[bad]] = 0.0
            stored[idx[bad]] = 0
            S[idx[bad]] = 0.0
            Y[idx[bad]] = 0.0
            d[bad] = -gf[bad]
        fresh = stored[idx] == 0
        norm = np.sqrt(np.einsum("ij,ij->i", d, d))
        alpha = np.where(fresh, np.minimum(1.0, 1.0 / np.where(norm > 0, norm, 1.0)), 1.0)

        # Backtracking, every searching problem evaluated in one call per round.
        accepted = np.zeros(len(idx), dtype=bool)
        new_x = xi.copy()
        new_f = np.full(len(idx), np.inf)
        new_g = np.zeros_like(gi)
        searching = np.arange(len(idx))
        for _ in range(_MAX_HALVINGS):
            if searching.size == 0:
                break
            ids = idx[searching]
            step_x = np.clip(
                xi[searching] + alpha[searching, None] * d[searching], lo[ids], hi[ids]
            )
            ft, gt = fun(step_x, ids)
            nfev[ids] += 1
            finite = np.isfinite(ft) & np.isfinite(gt).all(axis=1)
            ft = np.where(finite, ft, np.inf)
            improved = ft < best_f[ids]
            best_x[ids[improved]], best_f[ids[improved]] = step_x[improved], ft[improved]
            decrease = np.einsum("ij,ij->i", gi[searching], step_x - xi[searching])
            ok = finite & (ft <= f[ids] + _ARMIJO * decrease)
            acc = searching[ok]
            accepted[acc] = True
            new_x[acc], new_f[acc], new_g[acc] = step_x[ok], ft[ok], gt[ok]
            # Shorten by the minimiser of the quadratic through f(x), the slope gᵀ(x⁺ − x)/α
            # and f(x⁺), kept within [0.1α, 0.5α] (Nocedal & Wright 2006, eq. 3.57).
            a_old = alpha[searching]
            excess = ft - f[ids] - decrease
            with np.errstate(all="ignore"):
                step = -decrease * a_old / (2.0 * excess)
            step = np.where(finite & (excess > 0), step, 0.5 * a_old)
            alpha[searching] = np.clip(step, 0.1 * a_old, 0.5 * a_old)
            searching = searching[~ok & (nfev[ids] < maxfun[ids])]

        # Problems whose line search failed stop where they are.
        active[idx[~accepted]] = False
        a = np.flatnonzero(accepted)
        ia = idx[a]
        s = new_x[a] - xi[a]
        yv = new_g[a] - gi[a]
        sy = np.einsum("ij,ij->i", s, yv)
        yy = np.einsum("ij,ij->i", yv, yv)
        keep = sy > _EPS * yy
        k = ia[keep]
        if k.size:
            S[k, :-1], Y[k, :-1], rho[k, :-1] = S[k, 1:], Y[k, 1:], rho[k, 1:]
            S[k, -1], Y[k, -1], rho[k, -1] = s[keep], yv[keep], 1.0 / sy[keep]
            stored[k] = np.minimum(stored[k] + 1, memory)
        reduction = (f[ia] - new_f[a]) / np.maximum.reduce(
            [np.abs(f[ia]), np.abs(new_f[a]), np.ones(len(a))]
        )
        x[ia], f[ia], g[ia] = new_x[a], new_f[a], new_g[a]
        nit[ia] += 1
        done = (reduction <= factr * _EPS) | (nit[ia] >= maxiter[ia]) | (nfev[ia] >= maxfun[ia])
        done |= np.abs(projected_gradient(ia)).max(axis=1) <= pgtol
        active[ia[done]] = False
    return BatchResult(best_x, best_f, nit, nfev)


# The private driver's argument list this module was written for (its f2py/C docstring's
# first line); scipy's C port of L-BFGS-B has it from 1.15 on.
DRIVER_SIGNATURE = "setulb(m,x,l,u,nbd,f,g,factr,pgtol,wa,iwa,task,lsave,isave,dsave,maxls,ln_task)"


@functools.cache
def scipy_driver_usable() -> bool:
    """Whether scipy's private L-BFGS-B driver is the one :func:`minimise_driven` was written
    for: its docstring names :data:`DRIVER_SIGNATURE`, and it minimises ``f(x) = (x − 0.3)²``
    on ``[−1, 1]`` from ``x = 0.9`` to ``0.3`` (within 1e-6). Checked once per process."""
    try:
        from scipy.optimize import _lbfgsb
    except ImportError:
        reason = "scipy.optimize._lbfgsb is missing"
    else:
        doc = (getattr(getattr(_lbfgsb, "setulb", None), "__doc__", None) or "").strip()
        if not doc.startswith(DRIVER_SIGNATURE):
            reason = f"its driver reads {doc.splitlines()[0] if doc else 'nothing'!r}"
        else:

            def parabola(X, idx):
                return ((X - 0.3) ** 2).sum(axis=1), 2.0 * (X - 0.3)

            try:
                res = _driven(parabola, np.array([[0.9]]), -1.0, 1.0, maxiter=20, maxfun=40)
                works = abs(float(res.x[0, 0]) - 0.3) < 1e-6
            except Exception:  # any failure of a private API means: do not use it
                works = False
            reason = None if works else "its driver failed the check on a quadratic"
    if reason is None:
        return True
    import scipy

    log.warning(
        "scipy %s: %s; L-BFGS-B runs on workbench's own implementation instead",
        scipy.__version__,
        reason,
    )
    return False


def minimise_driven(
    fun: Callable[[np.ndarray, np.ndarray], tuple[np.ndarray, np.ndarray]],
    x0: np.ndarray,
    lower: np.ndarray,
    upper: np.ndarray,
    *,
    maxiter: int | np.ndarray,
    maxfun: int | np.ndarray,
    memory: int = 10,
    pgtol: float = 1e-5,
    factr: float = 1e7,
    maxls: int = 20,
) -> BatchResult:
    """The same ``B`` problems as :func:`minimise`, each driven by scipy's own L-BFGS-B (the
    reverse-communication ``setulb`` behind ``scipy.optimize.fmin_l_bfgs_b``: generalised
    Cauchy point, subspace minimisation, Moré–Thuente line search), with every problem's
    request for a value and gradient answered in one call of ``fun``; :func:`minimise` when
    :func:`scipy_driver_usable` says the installed scipy's driver is not the expected one.

    The stopping rules are ``fmin_l_bfgs_b``'s: ``maxiter`` iterations, or more than ``maxfun``
    evaluations at the end of an iteration. A problem whose evaluation fails (non-finite) stops
    with value ``inf``, as a failed start is skipped by :func:`workbench.gp.fit`.
    """
    if not scipy_driver_usable():
        return minimise(
            fun, x0, lower, upper, maxiter=maxiter, maxfun=maxfun, memory=memory, pgtol=pgtol,
            factr=factr,
        )  # fmt: skip
    return _driven(
        fun, x0, lower, upper, maxiter=maxiter, maxfun=maxfun, memory=memory, pgtol=pgtol,
        factr=factr, maxls=maxls,
    )  # fmt: skip


def _driven(
    fun: Callable[[np.ndarray, np.ndarray], tuple[np.ndarray, np.ndarray]],
    x0: np.ndarray,
    lower: np.ndarray,
    upper: np.ndarray,
    *,
    maxiter: int | np.ndarray,
    maxfun: int | np.ndarray,
    memory: int = 10,
    pgtol: float = 1e-5,
    factr: float = 1e7,
    maxls: int = 20,
) -> BatchResult:
    """:func:`minimise_driven` on scipy's driver, unchecked."""
    from scipy.optimize import _lbfgsb  # the driver of fmin_l_bfgs_b

    x = np.array(x0, dtype=float, ndmin=2)
    B, q = x.shape
    lo = np.ascontiguousarray(np.broadcast_to(np.asarray(lower, dtype=float), (B, q)))
    hi = np.ascontiguousarray(np.broadcast_to(np.asarray(upper, dtype=float), (B, q)))
    maxiter = np.broadcast_to(np.asarray(maxiter, dtype=int), (B,))
    maxfun = np.broadcast_to(np.asarray(maxfun, dtype=int), (B,))
    x = np.clip(x, lo, hi)
    nbd = np.full(q, 2, dtype=np.int32)  # both bounds
    m = memory
    # Each problem's driver arrays, bound once into setulb's argument list: the driver
    # reads f and g and writes x, task and its saved state in place, so the same tuple
    # serves every call (rebuilding it cost more than the driver itself at these sizes).
    xs = [x[i].copy() for i in range(B)]
    fs = [np.zeros(()) for _ in range(B)]
    gs = [np.zeros(q) for _ in range(B)]
    tasks = [np.zeros(2, dtype=np.int32) for _ in range(B)]

    def bound(i: int) -> tuple:
        return (
            m, xs[i], lo[i], hi[i], nbd, fs[i], gs[i], factr, pgtol,
            np.zeros(2 * m * q + 5 * q + 11 * m * m + 8 * m), np.zeros(3 * q, dtype=np.int32),
            tasks[i], np.zeros(4, dtype=np.int32), np.zeros(44, dtype=np.int32),
            np.zeros(29), maxls, np.zeros(2, dtype=np.int32),
        )  # fmt: skip

    calls = [bound(i) for i in range(B)]
    setulb = _lbfgsb.setulb
    nit = np.zeros(B, dtype=int)
    nfev = np.zeros(B, dtype=int)
    best_x, best_f = x.copy(), np.full(B, np.inf)
    failed = np.zeros(B, dtype=bool)
    last_x = [None] * B  # fmin_l_bfgs_b does not re-evaluate a repeated point
    last_fg = [None] * B
    pending = list(range(B))
    while pending:
        # Step every pending problem's driver until it asks for a value or stops.
        asks = []
        for i in pending:
            call, task = calls[i], tasks[i]
            while True:
                setulb(*call)
                code = task[0]
                if code == 3:  # wants f and g at x
                    if last_x[i] is not None and last_x[i] == xs[i].tobytes():
                        fs[i][()], gs[i][:] = last_fg[i]
                        continue
                    asks.append(i)
                    break
                if code == 1:  # a new iteration
                    nit[i] += 1
                    if nit[i] >= maxiter[i] or nfev[i] > maxfun[i]:
                        break
                    continue
                break
        if not asks:
            break
        idx = np.array(asks)
        X = np.stack([xs[i] for i in asks])
        fv, gv = fun(X, idx)
        nfev[idx] += 1
        finite = np.isfinite(fv) & np.isfinite(gv).all(axis=1)
        failed[idx[~finite]] = True
        better = finite & (fv < best_f[idx])
        best_x[idx[better]], best_f[idx[better]] = X[better], fv[better]
        for j in np.flatnonzero(finite):
            i = asks[j]
            fs[i][()], gs[i][:] = float(fv[j]), gv[j]
            last_x[i], last_fg[i] = X[j].tobytes(), (float(fv[j]), gv[j].copy())
        pending = [i for i in asks if not failed[i]]
    best_f[failed] = np.inf
    return BatchResult(best_x, best_f, nit, nfev)
