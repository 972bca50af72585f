"""Roots omega(k) of the dielectric function: polynomial roots of the rational models, Newton's
method on the kinetic ones, continuation over k, unstable bands, the fastest-growing mode and the
growth curve.  Normalised units (k in omega_p/c, omega in omega_p).
"""
from __future__ import annotations

import math

import numpy as np
from scipy import optimize

from .susceptibilities import _Rational, _eps, _species_list, _terms, model_for_species
from .tabulated import TabulatedTerm, coarse_term

__all__ = [
    "GROWTH_TOL", "cold_roots", "waterbag_roots", "maxwellian_roots", "juttner_growing_root",
    "growth_curve", "fastest_mode", "unstable_bands", "auto_kmax",
]

#: growth rates (omega_p) at or below this count as stable.  Near a band edge two real roots of
#: the cold/waterbag polynomial meet, and the companion-matrix eigenvalues there carry an
#: imaginary part of order sqrt(machine eps) * omega; this threshold sits above that noise.
GROWTH_TOL = 1.0e-7


# ============================================================================================
# Rational models: polynomial roots
# ============================================================================================
def _rational_roots(terms, k) -> np.ndarray:
    """All roots omega of 1 - Sum c_s / ((omega - k v1_s)(omega - k v2_s)) = 0, shape (nk, 2N).

    Multiplying by Q = Prod_s (omega - k v1_s)(omega - k v2_s) gives the monic polynomial
    Q - Sum_s c_s Q / ((omega - k v1_s)(omega - k v2_s)); its roots are the eigenvalues of the
    companion matrix (numpy.linalg.eigvals, batched over k).
    """
    k = np.atleast_1d(np.asarray(k, dtype=float))
    nk = k.size
    poles = [(k * t.v1, k * t.v2) for t in terms]
    n = 2 * len(terms)

    def times(coef, p):        # coef highest power first, times (omega - p)
        out = np.zeros((nk, coef.shape[1] + 1))
        out[:, :-1] += coef
        out[:, 1:] -= p[:, None] * coef
        return out

    q = np.ones((nk, 1))
    for p1, p2 in poles:
        q = times(times(q, p1), p2)
    num = q.copy()
    for s, t in enumerate(terms):
        qs = np.ones((nk, 1))
        for r, (p1, p2) in enumerate(poles):
            if r != s:
                qs = times(times(qs, p1), p2)
        num[:, 2:] -= t.c * qs
    comp = np.zeros((nk, n, n))
    comp[:, 0, :] = -num[:, 1:]
    if n > 1:
        idx = np.arange(n - 1)
        comp[:, idx + 1, idx] = 1.0
    roots = np.linalg.eigvals(comp)
    # polish on eps itself (better conditioned than the expanded polynomial where roots cluster,
    # e.g. a weak beam); a Newton step is kept only where it lowers |eps|
    kk = np.broadcast_to(k[:, None], roots.shape)
    with np.errstate(all="ignore"):
        e0 = np.abs(_eps(terms, kk, roots)[0])
        for _ in range(3):
            e, ew, _ = _eps(terms, kk, roots)
            trial = roots - e / ew
            e1 = np.abs(_eps(terms, kk, trial)[0])
            take = np.isfinite(e1) & (e1 < e0) & (np.abs(trial - roots) < 1e-6 * (1 + np.abs(roots)))
            roots = np.where(take, trial, roots)
            e0 = np.where(take, e1, e0)
    return roots



def cold_roots(k, species) -> np.ndarray:
    """All 2N roots omega(k) of :func:`eps_cold` (N distinct drifts), shape (len(k), 2N).

    No initial guess: the roots of the polynomial eps * Prod (omega - k v_s)^2 (companion matrix).
    """
    return _rational_roots(_terms(_species_list(species), "cold"), k)



def waterbag_roots(k, species) -> np.ndarray:
    """All roots omega(k) of :func:`eps_waterbag` (polynomial, companion matrix), shape (nk, 2N)."""
    return _rational_roots(_terms(_species_list(species), "waterbag"), k)


# ============================================================================================
# Newton's method on the kinetic eps
# ============================================================================================
def _newton(terms, k, w0, maxiter: int = 60, rtol: float = 1e-13):
    """Vectorised Newton iteration omega <- omega - eps/eps_omega; returns (omega, converged).

    Steps are capped at half the seed's |omega|.
    """
    k = np.asarray(k, float).ravel()
    w = np.asarray(w0, complex).ravel().copy()
    active = np.isfinite(w)
    conv = np.zeros(w.shape, bool)
    scale = np.abs(w) + 1e-3
    prev = np.full(w.shape, np.inf)
    with np.errstate(all="ignore"):
        for _ in range(maxiter):
            idx = np.nonzero(active)[0]
            if idx.size == 0:
                break
            e, ew, _ = _eps(terms, k[idx], w[idx])
            step = e / ew
            cap = 0.5 * scale[idx]
            big = np.abs(step) > cap
            step[big] *= cap[big] / np.abs(step[big])
            w[idx] -= step
            bad = ~np.isfinite(w[idx])
            size = np.abs(step) / (1.0 + np.abs(w[idx]))
            # converged, or stalled at the rounding level of eps (quadratic convergence stopped)
            done = ((size <= rtol) | ((size < 1e-9) & (size > 0.25 * prev[idx]))) & ~big
            prev[idx] = size
            conv[idx[done & ~bad]] = True
            active[idx[done | bad]] = False
        if conv.any():
            idx = np.nonzero(conv)[0]
            e, _, _, size = _eps(terms, k[idx], w[idx], scale=True)
            conv[idx[~(np.abs(e) < 1e-8 * size)]] = False
    return w, conv


def _mirror(w):
    """omega -> -conj(omega) where Re omega < 0: for real k and f, both are roots."""
    w = np.asarray(w, complex).copy()
    neg = w.real < 0
    w[neg] = -np.conj(w[neg])
    return w


def maxwellian_roots(k: float, species, guesses=None) -> np.ndarray:
    """Roots omega of :func:`eps_maxwellian` at one k (growing and damped), least damped first.

    Newton's method from ``guesses`` (default: the cold and the equivalent-waterbag roots, which
    for a single Maxwellian give the Bohm-Gross frequency), duplicates removed, Re omega >= 0.
    """
    species = _species_list(species)
    terms = _terms(species, "maxwellian")
    if guesses is None:
        guesses = np.concatenate([cold_roots([k], species)[0], waterbag_roots([k], species)[0]])
    guesses = _mirror(np.atleast_1d(np.asarray(guesses, complex)))
    w, ok = _newton(terms, np.full(guesses.shape, float(k)), guesses)
    return _distinct(_mirror(w[ok]))


def _distinct(w):
    w = w[np.argsort(-w.imag)]
    out = []
    for x in w:
        if all(abs(x - y) > 1e-9 * (1 + abs(x)) for y in out):
            out.append(x)
    return np.array(out, complex)


def juttner_growing_root(k: float, species, guess=None) -> complex | None:
    """The fastest-growing root (Im omega > 0) of :func:`eps_juttner` at one k, or None.

    Newton's method (exact derivative) from ``guess`` and from the cold and equivalent-waterbag
    roots with Im omega >= 0.  None means no growing root was found (the mode is stable or damped:
    damped Juttner roots are not supported, see :func:`eps_juttner`).
    """
    species = _species_list(species)
    seeds = np.concatenate([cold_roots([k], species)[0], waterbag_roots([k], species)[0]])
    seeds = _mirror(seeds)
    seeds = seeds[seeds.imag >= 0]
    if guess is not None:
        seeds = np.append(seeds, complex(guess))
    if seeds.size == 0:
        return None
    w, ok = _newton(_terms(species, "juttner"), np.full(seeds.shape, float(k)), seeds)
    w = _mirror(w[ok])
    w = w[w.imag > GROWTH_TOL]
    if w.size == 0:
        return None
    return complex(w[np.argmax(w.imag)])


# ============================================================================================
# Growth curves, band, fastest mode
# ============================================================================================
def _pick(roots):
    """Per row: the root of largest Im (ties: largest Re), after omega -> -conj(omega) for Re < 0."""
    roots = _mirror(roots)
    im = np.where(np.isfinite(roots), roots.imag, -np.inf)
    best = im.max(axis=1, keepdims=True)
    tie = im >= best - 1e-9 * (1 + np.abs(best))
    re = np.where(tie, roots.real, -np.inf)
    j = np.argmax(re, axis=1)
    w = roots[np.arange(roots.shape[0]), j]
    return w


class _Solver:
    """Roots of one model for one set of species, over arrays of k."""

    def __init__(self, species, model: str):
        self.species = _species_list(species)
        self.model = model
        self.terms = _terms(self.species, model)
        self.rational = all(isinstance(t, _Rational) for t in self.terms)
        self.damped = model == "maxwellian"          # only this model reports damped roots
        if not self.rational:
            self.seed_terms = [_terms(self.species, "cold"), _terms(self.species, "waterbag")]
        self.coarse = None
        if model == "table":
            self.seed_terms.append(_terms(self.species, "beams"))
            coarse = [coarse_term(t) if isinstance(t, TabulatedTerm) else t for t in self.terms]
            if any(a is not b for a, b in zip(coarse, self.terms)):
                # a long table: roots found on a coarser G through every m-th row, then polished
                # by Newton's method on the full table (the growth curve of a 1e4-row table in
                # about a second)
                self.coarse = _Solver.__new__(_Solver)
                self.coarse.__dict__.update(self.__dict__)
                self.coarse.terms = coarse
                self.coarse.coarse = None

    # -- all k at once ---------------------------------------------------------------------
    def best(self, k, extra=None, coarse: int = 96):
        """omega of the fastest-growing (or least-damped) root at each k; NaN where none.

        Kinetic models: Newton from the cold and equivalent-waterbag roots (and ``extra`` seeds),
        then continuation over k.  A long k array is first solved on ``coarse`` points, whose
        roots, interpolated, seed the fine grid.
        """
        k = np.atleast_1d(np.asarray(k, float))
        if self.rational:
            w = _pick(_rational_roots(self.terms, k))
            return w
        if self.coarse is not None:
            if k.size > 2 * coarse and np.all(np.diff(k) > 0) and extra is None:
                # roots of the coarse G on `coarse` points, interpolated to k: one seed per k
                kc = np.linspace(k[0], k[-1], coarse)
                wc = self.coarse.best(kc)
                j = np.clip(np.searchsorted(kc, k), 1, coarse - 1)
                t = (k - kc[j - 1]) / (kc[j] - kc[j - 1])
                w0 = np.where(np.isfinite(wc[j - 1]) & np.isfinite(wc[j]),
                              wc[j - 1] * (1 - t) + wc[j] * t,
                              np.where(t < 0.5, wc[j - 1] * k / kc[j - 1], wc[j] * k / kc[j]))
            else:
                w0 = self.coarse.best(k, extra=extra, coarse=coarse)
            ok = np.isfinite(w0)
            best = np.full(k.shape, np.nan, complex)
            if ok.any():
                sol, conv = _newton(self.terms, k[ok], w0[ok], maxiter=10)
                sol = _mirror(sol)
                best[ok] = np.where(conv & (sol.imag > GROWTH_TOL), sol, np.nan)
            return self._continue(k, best, gaps=True)
        seeds = _mirror(np.concatenate([_rational_roots(t, k) for t in self.seed_terms], axis=1))
        if extra is not None:
            seeds = np.concatenate([seeds, _mirror(np.asarray(extra, complex).reshape(k.size, -1))],
                                   axis=1)
        if k.size > 2 * coarse and np.all(np.diff(k) > 0):
            kc = np.linspace(k[0], k[-1], coarse)
            wc = self.best(kc)
            j = np.clip(np.searchsorted(kc, k), 1, coarse - 1)
            t = (k - kc[j - 1]) / (kc[j] - kc[j - 1])
            lin = wc[j - 1] * (1 - t) + wc[j] * t
            near = np.where(t < 0.5, wc[j - 1] * k / kc[j - 1], wc[j] * k / kc[j])
            seeds = np.concatenate([seeds, _mirror(lin)[:, None], _mirror(near)[:, None]], axis=1)
        if not self.damped:     # growing roots only: seeds that grow (continuation does the rest)
            seeds = np.where(seeds.imag > GROWTH_TOL, seeds, np.nan)
        kk = np.broadcast_to(k[:, None], seeds.shape)
        ok_seed = np.isfinite(seeds)
        w = np.full(seeds.shape, np.nan, complex)
        if ok_seed.any():
            sol, conv = _newton(self.terms, kk[ok_seed], seeds[ok_seed])
            sol[~conv] = np.nan
            w[ok_seed] = sol
        best = _pick(w)
        return self._continue(k, best)

    def _continue(self, k, best, reach: int = 1, gaps: bool = False):
        """Continuation over k: a root seeds Newton at the next ``reach`` k on either side (omega
        scaled with k), and every improvement seeds again, until nothing improves.  ``gaps``:
        start only from the roots next to a k without one (the others are polished already)."""
        nk = k.size
        if nk < 2:
            return best
        def sources(mask):     # growing-only models continue from growing roots only
            return mask if self.damped else mask & (best.imag > GROWTH_TOL)

        changed = sources(np.isfinite(best))
        if gaps:
            good = np.isfinite(best)
            hole = np.zeros(nk, bool)
            hole[:-1] |= ~good[1:]
            hole[1:] |= ~good[:-1]
            changed &= hole
        steps = np.concatenate([-np.arange(1, reach + 1), np.arange(1, reach + 1)])
        for _ in range(nk):
            src = np.nonzero(changed)[0]
            if src.size == 0:
                break
            dst = (src[:, None] + steps[None, :]).ravel()
            src2 = np.repeat(src, steps.size)
            keep = (dst >= 0) & (dst < nk)
            dst, src2 = dst[keep], src2[keep]
            seed = best[src2] * (k[dst] / k[src2])
            sol, conv = _newton(self.terms, k[dst], seed)
            sol = _mirror(sol)
            has = np.isfinite(best[dst])
            cur = np.where(has, best[dst].imag, 0.0)
            better = conv & (~has | (sol.imag > cur + 1e-10 * (1 + np.abs(cur))))
            changed = np.zeros(nk, bool)
            for d, s in zip(dst[better], sol[better]):
                if not np.isfinite(best[d]) or s.imag > best[d].imag + 1e-10:
                    best[d] = s
                    changed[d] = True
            changed = sources(changed)
        return best

    def growth(self, w):
        g = np.where(np.isfinite(w), w.imag, np.nan)
        if not self.damped:
            g = np.where(np.isfinite(g) & (g > GROWTH_TOL), g, 0.0)
        else:
            g = np.where(np.abs(g) <= GROWTH_TOL, 0.0, g)
        return g

    # -- one k -------------------------------------------------------------------------------
    def root_at(self, k: float, guess: complex) -> complex:
        """The root at k nearest to (or grown from) ``guess``."""
        if self.rational:
            r = _mirror(_rational_roots(self.terms, [k])[0])
            return complex(r[np.argmin(np.abs(r - guess))])
        sol, conv = _newton(self.terms, [k], [guess])
        return complex(_mirror(sol)[0]) if conv[0] else complex(np.nan, np.nan)

    def group_velocity(self, k: float, w: complex) -> complex:
        """d omega/d k = -eps_k / eps_omega at a root."""
        _, ew, ek = _eps(self.terms, np.array([k]), np.array([w], complex))
        return complex(-ek[0] / ew[0])


def _auto_kmax(species) -> float:
    """Upper end of the k range: 1.5 x the top of the cold unstable band (or a Debye scale)."""
    cold = _terms(species, "cold")
    wb2 = sum(t.c for t in cold)
    vs = sorted({t.v1 for t in cold})
    dv = [b - a for a, b in zip(vs, vs[1:]) if b - a > 1e-12]
    if dv:
        ks = math.sqrt(wb2) / min(dv)
        k = np.geomspace(1e-3 * ks, 1e2 * ks, 400)
        g = _pick(_rational_roots(cold, k)).imag
        unstable = np.nonzero(g > GROWTH_TOL)[0]
        if unstable.size:
            return 1.5 * float(k[unstable[-1]])
    thetas = [s.theta for s in species if s.theta > 0]
    if thetas:
        return 1.0 / math.sqrt(max(thetas))              # k lambda_D ~ 1
    return 2.0


def growth_curve(species, k, model: str | None = None):
    """(growth, omega_r) of the fastest-growing root at each k (arrays like k), omega_p units.

    Cold/waterbag: the root of largest Im among all polynomial roots.  Maxwellian: the least
    damped root (growth < 0 when stable).  Juttner: growing roots only, 0.0 where none.
    Roots are tracked over k by continuation from the cold/waterbag roots (see :class:`_Solver`).
    """
    species = _species_list(species)
    model = model or model_for_species(species)
    solver = _Solver(species, model)
    w = solver.best(np.asarray(k, float))
    return solver.growth(w), np.where(np.isfinite(w), w.real, np.nan)


def _refine_max(solver, k, w, i):
    """Fastest-growing mode near grid point i: Im(d omega/dk) = 0 by scipy.optimize.brentq."""
    lo, hi = max(i - 1, 0), min(i + 1, k.size - 1)

    def guess(x):
        return complex(np.interp(x, k[lo:hi + 1], w[lo:hi + 1].real),
                       np.interp(x, k[lo:hi + 1], w[lo:hi + 1].imag))

    def gv(x):
        r = solver.root_at(x, guess(x))
        return solver.group_velocity(x, r).imag if np.isfinite(r) else np.nan

    a, b = k[lo], k[hi]
    try:
        fa, fb = gv(a), gv(b)
        if lo < i < hi and np.isfinite(fa) and np.isfinite(fb) and fa > 0 > fb:
            x = optimize.brentq(gv, a, b, xtol=1e-15 * b, rtol=4 * np.finfo(float).eps,
                                maxiter=200)
        else:
            res = optimize.minimize_scalar(
                lambda x: -solver.root_at(x, guess(x)).imag, bounds=(a, b), method="bounded",
                options={"xatol": 1e-12 * b})
            x = float(res.x)
        r = solver.root_at(x, guess(x))
        if np.isfinite(r) and r.imag >= w[i].imag - 1e-12:
            return float(x), r
    except (ValueError, RuntimeError):
        pass
    return float(k[i]), complex(w[i])


def _bands_from(solver, k, w, g, bisect: int = 48):
    """Contiguous k ranges where growth > GROWTH_TOL, edges refined by bisection."""
    uns = g > GROWTH_TOL
    bands = []
    i = 0
    n = k.size
    while i < n:
        if not uns[i]:
            i += 1
            continue
        j = i
        while j + 1 < n and uns[j + 1]:
            j += 1
        bands.append((i, j))
        i = j + 1

    def edge(k_in, w_in, k_out):
        a, b = k_in, k_out
        wa = w_in
        for _ in range(bisect):
            m = 0.5 * (a + b)
            r = solver.root_at(m, wa)
            if np.isfinite(r) and r.imag > GROWTH_TOL:
                a, wa = m, r
            else:
                b = m
            if abs(b - a) <= 1e-10 * abs(a):
                break
        return 0.5 * (a + b)

    out = []
    for i, j in bands:
        if i == 0:
            r = solver.root_at(k[0] * 1e-3, w[0] * 1e-3)
            lo = 0.0 if (np.isfinite(r) and r.imag > GROWTH_TOL) else edge(k[0], w[0], k[0] * 1e-3)
        else:
            lo = edge(k[i], w[i], k[i - 1])
        hi = float(k[j]) if j == n - 1 else edge(k[j], w[j], k[j + 1])
        out.append((float(lo), float(hi)))
    return out


def unstable_bands(species, model: str | None = None, kmax: float | None = None, nk: int = 400):
    """List of (k_lo, k_hi) ranges where the model is unstable; k_lo = 0 means down to k -> 0."""
    species = _species_list(species)
    model = model or model_for_species(species)
    solver = _Solver(species, model)
    kmax = kmax or _auto_kmax(species)
    k = np.linspace(kmax / nk, kmax, nk)
    w = solver.best(k)
    return _bands_from(solver, k, w, solver.growth(w))


def _curve_and_fastest(solver, kmax, nk, extend: bool, helper=None):
    """Growth curve on nk points of (0, kmax] (kmax doubled while the maximum sits at the end)
    and the refined fastest mode.  ``helper``: a second solver (the maxwellian model) whose
    roots seed this one where it finds no growing root at all."""
    for _ in range(6):
        k = np.linspace(kmax / nk, kmax, nk)
        w = solver.best(k)
        g = solver.growth(w)
        if helper is not None and not np.any(g > GROWTH_TOL):
            wh = helper.best(k)
            if np.any(helper.growth(wh) > GROWTH_TOL):
                w = solver.best(k, extra=np.where(wh.imag > 0, wh, np.nan))
                g = solver.growth(w)
        if not np.any(g > GROWTH_TOL):
            return k, w, g, None
        i = int(np.nanargmax(g))
        if i < nk - 1 or not extend:
            break
        kmax *= 2.0
    kf, wf = _refine_max(solver, k, w, i)
    return k, w, g, (kf, wf)


def fastest_mode(species, model: str | None = None):
    """(k, growth, omega_r) of the fastest-growing mode of the continuum, or None when stable.

    k in omega_p/c, growth and omega_r in omega_p.  The maximum of the growth curve on a grid,
    refined by solving Im(d omega/dk) = 0 (scipy.optimize.brentq).  Fast enough to size a box.
    """
    species = _species_list(species)
    model = model or model_for_species(species)
    solver = _Solver(species, model)
    helper = _Solver(species, "maxwellian") if model == "juttner" else None
    _, _, _, fast = _curve_and_fastest(solver, _auto_kmax(species), 160, extend=True,
                                       helper=helper)
    if fast is None:
        return None
    kf, wf = fast
    return float(kf), float(wf.imag), float(wf.real)



def auto_kmax(species) -> float:
    """Default upper end of the k range (omega_p/c): 1.5 x the top of the cold unstable band, or
    1/sqrt(max theta) (k lambda_D ~ 1) when the cold model is stable, else 2."""
    return _auto_kmax(_species_list(species))
