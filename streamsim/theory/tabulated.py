"""Linear theory for any distribution: the effective velocity distribution G(v), the dielectric
function of a tabulated species, and the Penrose stability verdict for every deck.

Effective distribution.  With f_s normalised in u and dv = du/gamma^3, the 1D relativistic
dielectric function takes the non-relativistic form

    eps(k, omega) = 1 - (1/k^2) Int G'(v) / (v - omega/k) dv,   G(v) = Sum_s omega_ps^2 f_s(u(v)),

u(v) = v / sqrt(1 - v^2) (the standard reduction of the 1D relativistic problem to the
non-relativistic one, from memory; check: f = delta(u - u_0) gives G = omega_ps^2 delta(v - v_0) /
gamma_0^3, the cold beam with longitudinal mass gamma^3 m).  Normalised units throughout.

Tabulated species.  f is linear in v between the table's rows and zero outside
(:mod:`streamsim.distribution_table`), so G is piecewise linear with slopes g_j on [v_j, v_j+1]
and possible jumps G_0, -G_N at the ends.  The Cauchy integral is then exact in closed form:

    C(z) = Int G'(v)/(z - v) dv = Sum_j (g_j - g_{j-1}) log(z - v_j) + G_0/(z - v_0) - G_N/(z - v_N)

(g_{-1} = g_N = 0; summation by parts of Sum_j g_j [log(z - v_j) - log(z - v_j+1)]), and chi =
C(omega/k)/k^2, dC/dz = Sum_j (g_j - g_{j-1})/(z - v_j) - G_0/(z - v_0)^2 + G_N/(z - v_N)^2.  For
Im z > 0 this is the exact dielectric function of the interpolant (Landau 1946: the growing roots
need no contour deformation).  Below the axis the piecewise-linear G has no unique analytic
continuation, so the growth curve holds growing roots only; while Newton's method iterates, the
continuation of the logarithms (-2 pi i G'(Re z)) is used only to step back.  Damped roots come
separately from :func:`table_damped_root`, which continues a rational (AAA) fit of G.

Stability verdict (Penrose 1960, Phys. Fluids 3, 258): a plasma whose effective G is a smooth
function is unstable iff G has a local minimum at v_m with

    P(v_m) = Int (G(v) - G(v_m)) / (v - v_m)^2 dv > 0.

Rules used here: a minimum of the table's piecewise-linear G at a single row is taken as the
parabola through that row and its two neighbours (a linear corner would make P diverge, though
the tabulated f is meant to sample a smooth one); a table whose end value is below 1e-6 of the
peak falls to 0 over one more row spacing (a tail that has nearly ended; larger end values are
steps, as for a waterbag); a flat stretch (equal values, e.g. a gap where G
= 0 between two humps) is a minimum, tested at its middle and quarter points; the stretches
outside all species' support are not minima.  Cold species are delta functions in G: two cold
species with different velocities are unstable (the cold two-stream dispersion relation has
complex roots for any velocity difference at small enough k; e.g. Buneman 1959, Phys. Rev. 115,
503, for the electron-ion case), and a cold species is unstable beside warm species unless it sits
at a maximum of their G (anywhere else G has a minimum next to the delta function with P = +inf).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .formulas import juttner_normalisation, waterbag_edges

__all__ = ["effective_pieces", "penrose_verdict", "StabilityVerdict", "TabulatedTerm",
           "ContinuedTabulatedTerm", "table_damped_root"]

try:                                     # the hot loop of the table's Cauchy sum
    import numba as _nb
except ImportError:                      # pragma: no cover - numba is a dependency
    _nb = None


def _cauchy_sum_py(x, y, v, a):
    """Sum_j a_j log(z - v_j) and Sum_j a_j / (z - v_j) for z = x + i y (numpy reference)."""
    d = (x[:, None] + 1j * y[:, None]) - v[None, :]
    return np.log(d) @ a, (1.0 / d) @ a


if _nb is not None:
    @_nb.njit(cache=True, fastmath=True)
    def _cauchy_sum(x, y, v, a):
        """Sum_j a_j log(z - v_j) and Sum_j a_j / (z - v_j) for z = x + i y (principal log)."""
        m = x.size
        s0r = np.empty(m)
        s0i = np.empty(m)
        s1r = np.empty(m)
        s1i = np.empty(m)
        for i in range(m):
            xi = x[i]
            yi = y[i]
            y2 = yi * yi
            lr = 0.0
            li = 0.0
            dr = 0.0
            di = 0.0
            for j in range(v.size):
                dx = xi - v[j]
                r2 = dx * dx + y2
                aj = a[j]
                lr += aj * math.log(r2)
                li += aj * math.atan2(yi, dx)
                inv = aj / r2
                dr += inv * dx
                di -= inv * yi
            s0r[i] = 0.5 * lr
            s0i[i] = li
            s1r[i] = dr
            s1i[i] = di
        return s0r + 1j * s0i, s1r + 1j * s1i
else:                                    # pragma: no cover
    _cauchy_sum = _cauchy_sum_py


class TabulatedTerm:
    """chi = C(omega/k)/k^2 of one tabulated species (C: the closed form in the module docstring).

    ``wp2``: omega_ps^2; ``v``, ``f``: the rows' velocities and the normalised f (in u).
    """

    def __init__(self, wp2: float, v, f):
        v = np.ascontiguousarray(v, float)
        G = wp2 * np.asarray(f, float)
        g = np.diff(G) / np.diff(v)
        a = np.empty(v.size)
        a[0] = g[0]
        a[1:-1] = np.diff(g)
        a[-1] = -g[-1]
        self.v = v
        self.G = G
        self.slope = g
        self.a = np.ascontiguousarray(a)
        self.G0, self.GN = float(G[0]), float(G[-1])
        self.v0, self.vN = float(v[0]), float(v[-1])

    def _principal(self, z):
        """(z as a 1-D complex array, C(z), dC/dz) of the sum over the intervals, before any
        continuation below the real axis."""
        z = np.asarray(z, complex).ravel()
        s0, s1 = _cauchy_sum(np.ascontiguousarray(z.real), np.ascontiguousarray(z.imag),
                             self.v, self.a)
        with np.errstate(all="ignore"):
            d0 = z - self.v0
            dN = z - self.vN
            c0 = s0 + self.G0 / d0 - self.GN / dN
            c1 = s1 - self.G0 / d0**2 + self.GN / dN**2
        return z, c0, c1

    def cauchy(self, z):
        """(C(z), dC/dz) for a 1-D complex array z (continued below the real axis, see above)."""
        z, c0, c1 = self._principal(z)
        below = z.imag < 0
        if below.any():
            # continuation of log(z - v_j) through the axis at x: +2 pi i for v_j > x, which sums
            # to -2 pi i G'(x) (the slope of the interval holding x)
            x = z.real[below]
            j = np.searchsorted(self.v, x) - 1
            inside = (j >= 0) & (j < self.slope.size)
            gp = np.where(inside, self.slope[np.clip(j, 0, self.slope.size - 1)], 0.0)
            c0[below] -= 2j * math.pi * gp
        return c0, c1

    def chi(self, k, w):
        z = w / k
        c0, c1 = self.cauchy(np.ravel(z))
        c0 = c0.reshape(np.shape(z))
        c1 = c1.reshape(np.shape(z))
        chi = c0 / (k * k)
        return chi, c1 / k**3, -2.0 * chi / k - w * c1 / k**4


def coarse_term(term: TabulatedTerm, nodes: int = 256) -> TabulatedTerm:
    """A coarser piecewise-linear G through a subset of the rows (every m-th row, ends kept):
    the same distribution at lower resolution, used only to seed the roots of a long table."""
    n = term.v.size
    if n <= nodes:
        return term
    idx = np.unique(np.concatenate([np.linspace(0, n - 1, nodes).round().astype(int),
                                    [int(np.argmax(term.G))]]))
    return TabulatedTerm(1.0, term.v[idx], term.G[idx])


def table_seed_beams(s, beams: int = 6):
    """Cold stand-ins of a tabulated species (for the roots' seeds): ``beams`` cold beams at the
    mean u of equal-probability slices of the table, each with its share of omega_ps^2.  Returned
    as (c, v) pairs of chi = -c/(omega - k v)^2, c = share * omega_ps^2 / gamma^3."""
    t = s.table
    q = np.linspace(0.0, 1.0, 8 * beams + 1)
    u = t.inverse_cdf(q)
    out = []
    for b in range(beams):
        uu = 0.5 * (u[8 * b:8 * b + 8] + u[8 * b + 1:8 * b + 9])
        ub = float(np.mean(uu))
        g = math.sqrt(1.0 + ub * ub)
        out.append((s.omega_p2 / beams / g**3, ub / g))
    return out


def table_waterbag(s):
    """The lab-flat waterbag of a tabulated species' mean and rms u: (c, v1, v2) of
    chi = -c/((omega - k v1)(omega - k v2)), edges mean -+ sqrt(3) rms."""
    m, sd = s.table.moments()
    u1, u2 = m - math.sqrt(3.0) * sd, m + math.sqrt(3.0) * sd
    v1, v2 = u1 / math.sqrt(1 + u1 * u1), u2 / math.sqrt(1 + u2 * u2)
    return s.omega_p2 * (v2 - v1) / (u2 - u1), v1, v2


# ============================================================================================
# The effective distribution G(v) and the Penrose verdict
# ============================================================================================
def is_table(s) -> bool:
    return getattr(s, "distribution", None) == "table" and getattr(s, "table", None) is not None


def _juttner_piece(s, nodes: int = 4001, window: float = 40.0):
    """G = omega_ps^2 f(u(v)) of a drifting Juttner species on nodes uniform in rapidity."""
    th = s.theta
    eta_d = math.asinh(s.drift_u)
    xm = math.acosh(1.0 + window * th)
    xi = np.linspace(-xm, xm, nodes)
    v = np.tanh(eta_d + xi)
    f = np.exp(-2.0 * np.sinh(0.5 * xi) ** 2 / th) / juttner_normalisation(s.drift_u, th)
    keep = np.concatenate([[True], np.diff(v) > 0])
    return v[keep], s.omega_p2 * f[keep]


def effective_pieces(species):
    """(pieces, colds): pieces = [(v nodes, G nodes)] of the warm species, each piecewise linear
    and zero outside its nodes (table: its rows; Juttner: 4001 nodes uniform in rapidity; waterbag:
    flat between its edges), and colds = [(v, weight omega_ps^2/gamma^3)] of the cold species."""
    pieces, colds = [], []
    for s in species:
        if is_table(s):
            pieces.append((s.table.v, s.omega_p2 * s.table.f))
        elif s.distribution == "juttner" and (s.theta or 0.0) > 1e-12:
            pieces.append(_juttner_piece(s))
        elif s.distribution == "waterbag" and s.spread_u > 0:
            u1, u2 = waterbag_edges(s.drift_u, s.spread_u)
            v1, v2 = u1 / math.sqrt(1 + u1 * u1), u2 / math.sqrt(1 + u2 * u2)
            c = s.omega_p2 / (u2 - u1)
            pieces.append((np.array([v1, v2]), np.array([c, c])))
        else:
            g = s.drift_gamma
            colds.append((s.drift_beta, s.omega_p2 / g**3))
    return pieces, colds


def _sum_pieces(pieces):
    """(v, G) of Sum of the pieces on the union of their nodes; a jump at a piece's end becomes a
    step over a relative width of 1e-12 (so the sum is one piecewise-linear function)."""
    peak = max(float(np.max(np.abs(G))) for _, G in pieces)
    clean = []
    for v, G in pieces:
        # an end value below 1e-6 of the peak is a tail that has nearly ended, not a cut: it
        # falls to 0 over one more row spacing (a step of that size would be a corner minimum
        # with P = +inf beside any rising part of G, an artefact of where the table stops)
        v = np.asarray(v, float)
        G = np.asarray(G, float)
        if G.size > 2 and 0 < abs(G[0]) <= 1e-6 * peak:
            v = np.concatenate([[v[0] - (v[1] - v[0])], v])
            G = np.concatenate([[0.0], G])
        if G.size > 2 and 0 < abs(G[-1]) <= 1e-6 * peak:
            v = np.concatenate([v, [v[-1] + (v[-1] - v[-2])]])
            G = np.concatenate([G, [0.0]])
        clean.append((v, G))
    pieces = clean
    nodes = [np.asarray(p[0], float) for p in pieces]
    for v, G in pieces:
        eps = 1e-12 * max(1e-6, float(v[-1] - v[0]))
        if G[0] != 0:
            nodes.append(np.array([v[0] - eps]))
        if G[-1] != 0:
            nodes.append(np.array([v[-1] + eps]))
    x = np.unique(np.concatenate(nodes))
    y = np.zeros_like(x)
    for v, G in pieces:
        y += np.interp(x, v, G, left=0.0, right=0.0)
    return x, y


def _penrose_integral(x, y, vm, gm, skip=None):
    """Int (G - G_m)/(v - v_m)^2 dv over the whole line for the piecewise-linear (x, y), G = 0
    outside; intervals in ``skip`` (a boolean mask over the intervals) left out (added by the
    caller).  Exact: on an interval, G - G_m = A + s w with w = v - v_m, Int = [-A/w + s log|w|]."""
    s = np.diff(y) / np.diff(x)
    wa = x[:-1] - vm
    wb = x[1:] - vm
    A = y[:-1] - s * wa - gm
    ok = (wa * wb > 0) if skip is None else ((wa * wb > 0) & ~skip)
    with np.errstate(all="ignore"):
        seg = np.where(ok, (A / wa - A / wb) + s * np.log(np.abs(wb / wa)), 0.0)
    total = float(np.sum(seg))
    # outside the nodes G = 0: Int -G_m/w^2 = -G_m (1/(v_m - x_0) + 1/(x_N - v_m))
    total -= gm * (1.0 / (vm - x[0]) + 1.0 / (x[-1] - vm))
    return total


@dataclass
class StabilityVerdict:
    """The Penrose verdict on a deck's effective distribution (velocities in c)."""
    stable: bool
    band: tuple[float, float] | None = None        # phase velocities of the growing waves
    minima: list[tuple[float, float]] = field(default_factory=list)   # (v_m, P(v_m)) tested
    notes: list[str] = field(default_factory=list)

    def text(self) -> str:
        if self.stable:
            return "stable (Penrose criterion: no minimum of the effective distribution G(v) " \
                   "has P(v_m) > 0)"
        lo, hi = self.band
        return (f"unstable, for phase velocities between {lo:.6g} c and {hi:.6g} c "
                "(Penrose criterion on the effective distribution G(v))")

    def to_dict(self) -> dict:
        return {"stable": bool(self.stable), "text": self.text(),
                "phase_velocity_band": [float(x) for x in self.band] if self.band else None,
                "minima": [{"v": float(v), "penrose_integral": (float(p) if math.isfinite(p)
                                                                else None)}
                           for v, p in self.minima],
                "criterion": "Penrose 1960, Phys. Fluids 3, 258",
                "notes": list(self.notes)}

    @classmethod
    def from_dict(cls, d: dict) -> "StabilityVerdict":
        band = d.get("phase_velocity_band")
        return cls(bool(d["stable"]), tuple(band) if band else None,
                   [(m["v"], math.inf if m["penrose_integral"] is None else m["penrose_integral"])
                    for m in d.get("minima", [])], list(d.get("notes", [])))


def _runs(y):
    """Maximal runs [i, j] of equal consecutive values."""
    out = []
    i = 0
    n = y.size
    while i < n:
        j = i
        while j + 1 < n and y[j + 1] == y[i]:
            j += 1
        out.append((i, j))
        i = j + 1
    return out


def _extrema(x, y):
    """(minima, maxima) of a piecewise-linear G as runs (i, j) of nodes, interior only."""
    runs = _runs(y)
    mins, maxs = [], []
    for r, (i, j) in enumerate(runs):
        left = y[runs[r - 1][0]] if r > 0 else None
        right = y[runs[r + 1][0]] if r + 1 < len(runs) else None
        if left is not None and right is not None and left > y[i] and right > y[i]:
            mins.append((i, j))
        if (left is None or left < y[i]) and (right is None or right < y[i]):
            maxs.append((i, j))
    return mins, maxs


def _test_minimum(x, y, i, j):
    """(v_m, P) at the minimum run [i, j] (see the rules in the module docstring)."""
    if j > i:                                    # flat stretch: its middle and quarter points
        best = (0.5 * (x[i] + x[j]), -math.inf)
        for t in (0.25, 0.5, 0.75):
            vm = x[i] + t * (x[j] - x[i])
            p = _penrose_integral(x, y, vm, float(y[i]))
            if p > best[1]:
                best = (vm, p)
        return best
    # single row: the parabola through rows i-1, i, i+1 over [x_{i-1}, x_{i+1}]
    xa, xb, xc = x[i - 1], x[i], x[i + 1]
    ya, yb, yc = y[i - 1], y[i], y[i + 1]
    h1, h2 = xb - xa, xc - xb
    if min(h1, h2) <= 1e-9 * max(h1, h2):        # a jump's step beside it: a true corner
        return float(xb), math.inf
    c2 = ((yc - yb) / h2 - (yb - ya) / h1) / (h1 + h2)      # curvature: p = ... + c2 w^2
    c1 = (yb - ya) / h1 + c2 * h1                           # so that p(xa) = ya, p(xb) = yb
    # p(v) = yb + c1 (v - xb) + c2 (v - xb)^2 ; minimum at v* = xb - c1/(2 c2)
    vs = float(xb - c1 / (2.0 * c2)) if c2 > 0 else float(xb)
    vs = min(max(vs, xa), xc)
    ps = yb + c1 * (vs - xb) + c2 * (vs - xb) ** 2
    skip = np.zeros(x.size - 1, bool)
    skip[i - 1] = skip[i] = True
    p = _penrose_integral(x, y, vs, ps, skip)
    # the two intervals as the parabola: (p(v) - p*)/(v - v*)^2 = c2 there
    p += c2 * (xc - xa)
    return vs, p


def penrose_verdict(species) -> StabilityVerdict:
    """Penrose's criterion on the deck's effective distribution (rules: module docstring)."""
    species = list(species)
    pieces, colds = effective_pieces(species)
    notes = []
    for s in species:
        if is_table(s):
            cut = s.table.tail_note()
            if cut:
                notes.append(f"species {s.name}: {cut} (a tail can fill a minimum of G: the "
                             "verdict holds for the table as given)")
    cold_v = sorted({round(v, 15) for v, _ in colds})
    if len(cold_v) >= 2:
        notes.append("two or more cold species at different velocities: unstable (cold "
                     "two-stream dispersion relation)")
        return StabilityVerdict(False, (cold_v[0], cold_v[-1]),
                                [(v, math.inf) for v in cold_v], notes)
    if not pieces:
        return StabilityVerdict(True, None, [], notes + ["a single cold velocity: stable"])
    x, y = _sum_pieces(pieces)
    mins, maxs = _extrema(x, y)
    max_v = [0.5 * (x[i] + x[j]) for i, j in maxs]
    if cold_v:
        vc = cold_v[0]
        at_max = any(x[i] - 1e-9 <= vc <= x[j] + 1e-9 or
                     (i > 0 and j + 1 < x.size and x[i - 1] < vc < x[j + 1]) for i, j in maxs)
        if not at_max:
            near = min(max_v, key=lambda m: abs(m - vc)) if max_v else vc
            notes.append(f"cold species at v = {vc:.6g} c beside warm species, not at a maximum "
                         "of their G: unstable")
            return StabilityVerdict(False, (min(vc, near), max(vc, near)), [(vc, math.inf)], notes)
    tested = []
    unstable = []
    for i, j in mins:
        vm, p = _test_minimum(x, y, i, j)
        tested.append((float(vm), float(p)))
        if p > 0:
            left = [m for m in max_v if m < vm]
            right = [m for m in max_v if m > vm]
            unstable.append((max(left) if left else float(x[0]), min(right) if right else float(x[-1])))
    if not unstable:
        return StabilityVerdict(True, None, tested, notes)
    band = (min(b[0] for b in unstable), max(b[1] for b in unstable))
    notes.append("growing waves are expected at phase velocities between the maxima of G that "
                 "flank the unstable minima")
    return StabilityVerdict(False, band, tested, notes)


# ============================================================================================
# Damped roots by analytic continuation of a rational fit (AAA)
# ============================================================================================
class ContinuedTabulatedTerm(TabulatedTerm):
    """A tabulated term whose Landau continuation below the real axis uses the analytic
    continuation of a rational approximation of G (the AAA algorithm, Nakatsukasa, Sete &
    Trefethen 2018, SIAM J. Sci. Comput. 40, A1494; scipy.interpolate.AAA):

        C(z) = C_int(z) - 2 pi i G'(z)   for Im z < 0  (Landau 1946),

    with C_int the closed-form integral of the table's interpolant (valid on either side of the
    axis) and G'(z) = -Sum_j r_j/(z - p_j)^2 from the fit's poles p_j and residues r_j.  This
    treats the table as samples of a smooth (analytic) f; it is checked against the published
    Landau root of a Maxwellian written as a table.
    """

    def __init__(self, wp2: float, v, f, nodes: int = 2000, rtol: float = 1e-13):
        super().__init__(wp2, v, f)
        from scipy.interpolate import AAA
        idx = np.unique(np.linspace(0, self.v.size - 1, min(nodes, self.v.size))
                        .round().astype(int))
        fit = AAA(self.v[idx], self.G[idx], rtol=rtol, max_terms=120)
        self.poles = np.asarray(fit.poles(), complex)
        self.residues = np.asarray(fit.residues(), complex)
        self.fit_error = float(np.max(np.abs(fit(self.v) - self.G)) / np.max(np.abs(self.G)))

    def cauchy(self, z):
        z, c0, c1 = self._principal(z)
        with np.errstate(all="ignore"):
            below = z.imag < 0
            if below.any():
                d = z[below, None] - self.poles[None, :]
                g1 = -(self.residues / d**2).sum(axis=1)
                g2 = 2.0 * (self.residues / d**3).sum(axis=1)
                c0[below] -= 2j * math.pi * g1
                c1[below] -= 2j * math.pi * g2
        return c0, c1


def table_damped_root(k: float, species, guess: complex):
    """A root omega (damped or growing) of eps at one k for a deck with tabulated species, by
    Newton's method from ``guess`` with the AAA continuation of every table
    (:class:`ContinuedTabulatedTerm`); returns (omega, largest relative fit error of G), or
    (None, error) when Newton does not converge."""
    from .roots import _newton
    from .susceptibilities import _terms
    terms = []
    err = 0.0
    for t in _terms(list(species), "table"):
        if isinstance(t, TabulatedTerm):
            c = ContinuedTabulatedTerm(1.0, t.v, t.G)
            err = max(err, c.fit_error)
            terms.append(c)
        else:
            terms.append(t)
    w, ok = _newton(terms, np.array([float(k)]), np.array([complex(guess)]))
    return (complex(w[0]) if ok[0] else None), err
