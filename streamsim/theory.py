"""Linear theory: the 1D electrostatic dielectric function of a deck's species and its roots.

Everything is in the normalised units of streamsim (k in omega_p/c, omega in omega_p, u = gamma*beta,
velocities in c); physical units appear only in :meth:`Dispersion.to_dict`, through
:mod:`streamsim.units`.

The dielectric function for waves exp(i(kx - omega t)) along B (k > 0) is

    eps(k, omega) = 1 + sum_s chi_s,    chi_s = (omega_ps^2 / k) * Int f_s'(u) / (omega - k v(u)) du,

with f_s normalised to 1 in the lab frame, v(u) = u / sqrt(1 + u^2) and omega_ps^2 = density *
charge^2 / mass (e.g. Krall & Trivelpiece, *Principles of Plasma Physics* (1973), ch. 8; the
relativistic 1D form follows from the Vlasov equation with du/dt = (q/m) E).  Note the sign: a
cold species, f = delta(u - u_s), gives chi_s = -omega_ps^2 / (gamma_s^3 (omega - k v_s)^2).

Models (one per species kind; :func:`model_for_species` picks the one the deck implies):

``cold``        every species a delta function (longitudinal mass gamma^3 m).  eps is rational;
                all roots come from the polynomial (numpy companion matrix).
``waterbag``    f flat in u between two edges; also rational, so also a polynomial.  A warm Juttner
                species is replaced by the waterbag of the same rest-frame <u'^2>.
``maxwellian``  non-relativistic Maxwellians through the plasma dispersion function Z (Landau
                contour, so damped roots are right); drift kinematics kept (see
                :func:`maxwellian_parameters`).  Cold and waterbag species keep their exact terms.
``juttner``     drifting 1D Maxwell-Juttner by quadrature (singularity subtraction, exact in the
                upper half plane); growing roots only.  Cold and waterbag species keep their exact
                terms.  A deck with waterbag *and* warm Juttner species uses this model.

Lab-frame distributions: the phase-space density is a Lorentz invariant, so a species drifting
with (beta_d, Gamma_d) whose rest-frame distribution is F(u') has f(u) ∝ F(Gamma_d (u - beta_d
gamma)) in the lab (e.g. de Groot, van Leeuwen & van Weert, *Relativistic Kinetic Theory* (1980),
ch. 1).  For the Juttner species this is f ∝ exp(-Gamma_d (gamma - beta_d u)/theta); for the
waterbag it is flat in u between the boosted edges.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
import numpy as np
from scipy import optimize, special

__all__ = [
    "MODELS", "GROWTH_TOL",
    "model_for_species", "plasma_dispersion_z", "plasma_dispersion_z_prime",
    "juttner_distribution", "juttner_u2_rest", "waterbag_edges", "equivalent_waterbag_spread",
    "maxwellian_parameters",
    "eps_cold", "cold_roots", "eps_waterbag", "waterbag_roots",
    "eps_maxwellian", "maxwellian_roots", "eps_juttner", "juttner_growing_root",
    "growth_curve", "fastest_mode", "unstable_bands", "theory_for_deck",
    "Dispersion", "FastestMode", "BoxMode",
]

MODELS = ("cold", "waterbag", "maxwellian", "juttner")

#: growth rates (omega_p) at or below this count as stable.  Near a band edge two real roots of
#: the cold/waterbag polynomial meet, and the companion-matrix eigenvalues there carry an
#: imaginary part of order sqrt(machine eps) * omega; this threshold sits above that noise.
GROWTH_TOL = 1.0e-7

#: below this temperature a Juttner species is treated as cold (the quadrature window would be
#: narrower than the resolution of double precision in the rapidity).
THETA_COLD = 1.0e-12

_NODES = 48          # Gauss-Legendre nodes per Juttner species (64 for theta >= 1); converged
                     # to ~1e-14 against 256 nodes for 1e-6 <= theta <= 3, growing or damped
_WINDOW = 40.0       # the Juttner window keeps exp(-(cosh xi - 1)/theta) >= exp(-40)


# ============================================================================================
# Species -> model
# ============================================================================================
def _is_warm_juttner(s) -> bool:
    return s.distribution == "juttner" and s.theta > 0.0


def model_for_species(species) -> str:
    """The model a set of species implies.

    "cold" if every species is cold; "waterbag" if any is a waterbag and the rest are cold;
    "juttner" if any species is a warm Juttner (also when waterbags are present: the Juttner model
    keeps their exact rational terms).  "maxwellian" is only used on request.
    """
    species = list(species)
    if any(_is_warm_juttner(s) for s in species):
        return "juttner"
    if any(s.distribution == "waterbag" and s.spread_u > 0 for s in species):
        return "waterbag"
    return "cold"


# ============================================================================================
# Special functions and distributions
# ============================================================================================
def plasma_dispersion_z(zeta):
    """Plasma dispersion function Z(zeta) = i sqrt(pi) w(zeta), w the Faddeeva function.

    Z(zeta) = pi^(-1/2) Int exp(-x^2)/(x - zeta) dx for Im zeta > 0, analytically continued to the
    whole plane (Landau contour).  Fried & Conte, *The Plasma Dispersion Function* (1961);
    w from :func:`scipy.special.wofz`.
    """
    return 1j * math.sqrt(math.pi) * special.wofz(np.asarray(zeta, dtype=complex))


def plasma_dispersion_z_prime(zeta):
    """Z'(zeta) = -2 (1 + zeta Z(zeta))  (Fried & Conte 1961)."""
    zeta = np.asarray(zeta, dtype=complex)
    return -2.0 * (1.0 + zeta * plasma_dispersion_z(zeta))


def juttner_distribution(u, drift_u: float, theta: float):
    """Lab-frame drifting 1D Maxwell-Juttner distribution, normalised to 1 in u.

    f(u) = exp(-Gamma_d (gamma - beta_d u)/theta) / (2 Gamma_d K_1(1/theta)),  gamma = sqrt(1+u^2).

    The rest-frame form exp(-gamma'/theta) is Juttner, Ann. Phys. 339, 856 (1911), in 1D; the lab
    form follows from the invariance of the phase-space density.  The normalisation:
    Int exp(-cosh(eta - eta_d)/theta) cosh(eta) d eta = 2 cosh(eta_d) K_1(1/theta)
    (Abramowitz & Stegun 9.6.24).  Computed with the scaled Bessel function k1e, stable for
    small theta.
    """
    u = np.asarray(u, dtype=float)
    eta = np.arcsinh(u)
    xi = eta - math.asinh(drift_u)
    phi = 2.0 * np.sinh(0.5 * xi) ** 2 / theta           # (cosh xi - 1)/theta, no cancellation
    return np.exp(-phi) / (2.0 * math.sqrt(1.0 + drift_u**2) * special.k1e(1.0 / theta))


def juttner_u2_rest(theta: float) -> float:
    """Rest-frame <u'^2> of the 1D Juttner distribution: theta K_2(1/theta) / K_1(1/theta).

    From Int sinh^2(eta) cosh(eta) e^(-cosh(eta)/theta) d eta = 2 theta K_2(1/theta) (integration
    by parts, A&S 9.6.24).  Tends to theta (the Maxwellian v_th^2) as theta -> 0.
    """
    if theta <= 0:
        return 0.0
    x = 1.0 / theta
    return theta * special.kve(2, x) / special.kve(1, x)


def equivalent_waterbag_spread(theta: float) -> float:
    """Waterbag half-width Delta with the same rest-frame <u'^2> as a Juttner of temperature theta.

    A flat distribution on [-Delta, Delta] has <u'^2> = Delta^2/3, so Delta = sqrt(3 <u'^2>).
    """
    return math.sqrt(3.0 * juttner_u2_rest(theta))


def waterbag_edges(drift_u: float, spread_u: float) -> tuple[float, float]:
    """Lab-frame edges (u_-, u_+) of a waterbag flat in u' on [-Delta, Delta] in its drift frame.

    u_pm = Gamma_d (pm Delta + beta_d sqrt(1 + Delta^2))  (Lorentz boost of the edge momenta).
    By the invariance of the phase-space density the lab distribution is flat between them.
    """
    g = math.sqrt(1.0 + drift_u**2)
    b = drift_u / g
    e = math.sqrt(1.0 + spread_u**2)
    return g * (-spread_u + b * e), g * (spread_u + b * e)


def maxwellian_parameters(s, kinematic: bool = True) -> tuple[float, float, float]:
    """(omega_eff^2, v_s, v_th) of the Maxwellian that stands in for a drifting species.

    With ``kinematic`` (the default) the drift kinematics of the theta -> 0 limit of the drifting
    Juttner are kept: omega_eff^2 = omega_ps^2 / Gamma_d^3 (longitudinal mass) and
    v_th = sqrt(theta) / Gamma_d^2 (dv = du / gamma^3 about the drift); then the Maxwellian model
    reduces to the cold relativistic model as theta -> 0.  Without it: omega_ps^2, v_th^2 = theta.
    At beta_d << 1 both are the textbook non-relativistic Maxwellian; v_s = beta_d in both.
    """
    g = s.drift_gamma
    if kinematic:
        return s.omega_p2 / g**3, s.drift_beta, math.sqrt(s.theta) / g**2
    return s.omega_p2, s.drift_beta, math.sqrt(s.theta)


def _one_plus_zeta_z(zeta):
    """R = 1 + zeta Z(zeta) and dR/dzeta = Z - 2 zeta R, without cancellation at large |zeta|.

    Where |zeta| > 30 and Re(zeta^2) > 60 the asymptotic series
    1 + zeta Z = -Sum_{n>=1} (2n-1)!! / (2 zeta^2)^n  (Fried & Conte 1961) is used; there the
    Landau term i sqrt(pi) sigma zeta exp(-zeta^2) is below 1e-20 of the result.
    Elsewhere wofz directly.
    """
    zeta = np.asarray(zeta, dtype=complex)
    with np.errstate(all="ignore"):
        z = plasma_dispersion_z(zeta)
        r = 1.0 + zeta * z
        dr = z - 2.0 * zeta * r
        big = (np.abs(zeta) > 30.0) & ((zeta * zeta).real > 60.0)
        if np.any(big):
            zb = zeta[big]
            x = 1.0 / (2.0 * zb * zb)
            term = np.ones_like(zb)
            ra = np.zeros_like(zb)
            za = np.zeros_like(zb)                       # Z = -(1/zeta) Sum (2n-1)!! x^n, n >= 0
            for n in range(0, 10):
                if n > 0:
                    term = term * (2 * n - 1) * x
                    ra -= term
                za -= term / zb
            r[big] = ra
            dr[big] = za - 2.0 * zb * ra
    return r, dr


# ============================================================================================
# Susceptibility terms
# ============================================================================================
@dataclass(frozen=True)
class _Rational:
    """chi = -c / ((omega - k v1)(omega - k v2)); v1 = v2 is a cold species."""
    c: float
    v1: float
    v2: float

    def chi(self, k, w):
        d1 = w - k * self.v1
        d2 = w - k * self.v2
        p = d1 * d2
        chi = -self.c / p
        p2 = p * p
        return chi, self.c * (d1 + d2) / p2, -self.c * (self.v1 * d2 + self.v2 * d1) / p2


@dataclass(frozen=True)
class _Maxwell:
    """chi = (a / (k^2 v_t^2)) (1 + zeta Z(zeta)), zeta = (omega - k v)/(sqrt2 k v_t)."""
    a: float
    v: float
    vt: float

    def chi(self, k, w):
        s = math.sqrt(2.0) * self.vt
        zeta = (w - k * self.v) / (s * k)
        r, dr = _one_plus_zeta_z(zeta)
        amp = self.a / (self.vt**2 * k * k)
        chi = amp * r
        return chi, amp * dr / (s * k), -2.0 * chi / k - amp * dr * w / (s * k * k)


class _Juttner:
    """chi = (omega_ps^2 / k^2) C(omega/k),  C(z) = Int_{-1}^{1} G(v)/(z - v) dv,  G = df/dv.

    (Change of variable du = gamma^3 dv in the definition of chi.)  Quadrature: Gauss-Legendre in
    the rapidity offset xi = eta - eta_d on a window where exp(-(cosh xi - 1)/theta) > e^-40, with
    the pole subtracted (Davis & Rabinowitz, *Methods of Numerical Integration* (1984), sec. 2.12):

        C(z) = Sum_j W_j (G_j - G(z)) / (z - v_j) + G(z) [log(z - v_a) - log(z - v_b)],

    which stays accurate however close z lies to the real axis, since the subtracted integrand is
    analytic in v.  G(z) is the analytic continuation of G (through the complex rapidity
    artanh z).  dC/dz = C[G'] (integration by parts), so Newton's method gets the exact derivative.
    For Im z < 0 the Landau continuation adds -2 pi i G(z); used only while iterating.
    """

    def __init__(self, wp2: float, drift_u: float, theta: float, n: int | None = None):
        if n is None:
            n = _NODES if theta < 1.0 else 64
        self.wp2 = wp2
        self.theta = theta
        self.eta_d = math.asinh(drift_u)
        self.norm = 1.0 / (2.0 * math.sqrt(1.0 + drift_u**2) * special.k1e(1.0 / theta))
        xm = math.acosh(1.0 + _WINDOW * theta)
        x, w = np.polynomial.legendre.leggauss(n)
        xi = xm * x
        eta = self.eta_d + xi
        self.v = np.tanh(eta)
        self.W = w * xm / np.cosh(eta) ** 2              # dv = sech^2(eta) d eta
        self.G, self.G1 = self._g(eta, xi)
        self.mass = float(np.sum(w * xm * np.cosh(eta) * self.norm * np.exp(
            -2.0 * np.sinh(0.5 * xi) ** 2 / theta)))       # Int f du, should be 1
        self._wg = np.stack([self.W * self.G, self.W * self.G1, self.W], axis=1)
        self.va = math.tanh(self.eta_d - xm)
        self.vb = math.tanh(self.eta_d + xm)
        self.width = self.vb - self.va

    def _g(self, eta, xi):
        """G = df/dv = -phi' f and G' = (phi'^2 - phi'') f, phi = Gamma_d gamma (1 - beta_d v)/theta.

        In rapidity: phi - 1/theta = (cosh xi - 1)/theta, phi' = cosh^2(eta) sinh(xi)/theta,
        phi'' = cosh^3(eta) (2 sinh eta sinh xi + cosh eta cosh xi)/theta.
        """
        th = self.theta
        ch = np.cosh(eta)
        sh = np.sinh(eta)
        f = self.norm * np.exp(-2.0 * np.sinh(0.5 * xi) ** 2 / th)
        p1 = ch * ch * np.sinh(xi) / th
        p2 = ch**3 * (2.0 * sh * np.sinh(xi) + ch * np.cosh(xi)) / th
        return -p1 * f, (p1 * p1 - p2) * f

    def cauchy(self, z):
        """(C[G](z), C[G'](z)) for a 1-D complex array z (Landau continuation below the axis)."""
        z = np.asarray(z, dtype=complex)
        c0 = np.empty(z.shape, complex)
        c1 = np.empty(z.shape, complex)
        inside = np.abs(z.real) < 1.0
        # the pole is subtracted only where it is close to the nodes; further away (|Im z| more
        # than half the window) plain Gauss-Legendre is exact to rounding, and G(z) there grows
        # like exp((Im z)^2 / 2 v_th^2), which would only amplify rounding
        near = inside & (z.real > self.va - self.width) & (z.real < self.vb + self.width) & (
            np.abs(z.imag) < 0.5 * self.width)
        below = inside & (z.imag < 0.0)
        need = near | below
        with np.errstate(all="ignore"):
            gz = np.zeros(z.shape, complex)
            g1z = np.zeros(z.shape, complex)
            if need.any():
                ez = np.arctanh(z[need])
                gz[need], g1z[need] = self._g(ez, ez - self.eta_d)
            # one complex division per (z, node), then one real matrix product for
            # [Sum W G/(z-v), Sum W G'/(z-v), Sum W/(z-v)]
            inv = 1.0 / (z[:, None] - self.v[None, :])
            s = inv @ self._wg
            c0[:] = s[:, 0]
            c1[:] = s[:, 1]
            if near.any():
                zn = z[near]
                # pole subtracted: Sum W (G_j - G(z))/(z - v_j) + G(z) Int_{va}^{vb} dv/(z - v)
                resid = (np.log(zn - self.va) - np.log(zn - self.vb)) - s[near, 2]
                c0[near] += gz[near] * resid
                c1[near] += g1z[near] * resid
            if below.any():
                c0[below] -= 2j * math.pi * gz[below]
                c1[below] -= 2j * math.pi * g1z[below]
        return c0, c1

    def chi(self, k, w):
        z = w / k
        c0, c1 = self.cauchy(np.ravel(z))
        c0 = c0.reshape(np.shape(z))
        c1 = c1.reshape(np.shape(z))
        chi = self.wp2 * c0 / (k * k)
        return chi, self.wp2 * c1 / k**3, -2.0 * chi / k - self.wp2 * w * c1 / k**4


def _rational_term(s, model: str) -> _Rational:
    """The cold or waterbag term of one species (warm Juttner -> equivalent waterbag)."""
    wp2 = s.omega_p2
    spread = 0.0
    if model != "cold":
        if s.distribution == "waterbag":
            spread = s.spread_u
        elif _is_warm_juttner(s):
            spread = equivalent_waterbag_spread(s.theta)
    if spread <= 0.0:
        g = s.drift_gamma
        v = s.drift_beta
        return _Rational(wp2 / g**3, v, v)
    u1, u2 = waterbag_edges(s.drift_u, spread)
    v1, v2 = u1 / math.sqrt(1 + u1 * u1), u2 / math.sqrt(1 + u2 * u2)
    return _Rational(wp2 * (v2 - v1) / (u2 - u1), v1, v2)


def _terms(species, model: str) -> list:
    """Susceptibility terms of the species under a model (rational terms of equal poles merged)."""
    if model not in MODELS:
        raise ValueError(f"unknown model {model!r}; choose one of {', '.join(MODELS)}")
    out = []
    for s in species:
        warm = _is_warm_juttner(s) and s.theta > THETA_COLD
        if model == "maxwellian" and warm:
            a, v, vt = maxwellian_parameters(s)
            out.append(_Maxwell(a, v, vt))
        elif model == "juttner" and warm:
            out.append(_Juttner(s.omega_p2, s.drift_u, s.theta))
        else:
            out.append(_rational_term(s, "cold" if model == "cold" else "waterbag"))
    return _merge(out)


def _merge(terms):
    rational = {}
    rest = []
    for t in terms:
        if isinstance(t, _Rational):
            key = (t.v1, t.v2)
            for (a, b) in rational:
                if abs(a - t.v1) <= 1e-14 * (1 + abs(a)) and abs(b - t.v2) <= 1e-14 * (1 + abs(b)):
                    key = (a, b)
                    break
            rational[key] = rational.get(key, 0.0) + t.c
        else:
            rest.append(t)
    return [_Rational(c, a, b) for (a, b), c in rational.items()] + rest


def _eps(terms, k, w, scale: bool = False):
    """(eps, d eps/d omega, d eps/d k) for arrays k, w of one shape.

    With ``scale``, also 1 + Sum_s |chi_s|: the size of the terms that cancel at a root, against
    which the residual |eps| is judged (at small k the single chi_s grow like 1/k^2).
    """
    e = np.ones(np.shape(w), complex)
    ew = np.zeros(np.shape(w), complex)
    ek = np.zeros(np.shape(w), complex)
    size = np.ones(np.shape(w))
    for t in terms:
        c, cw, ck = t.chi(k, w)
        e = e + c
        ew = ew + cw
        ek = ek + ck
        size = size + np.abs(c)
    if scale:
        return e, ew, ek, size
    return e, ew, ek


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


def _species_list(species):
    species = list(species)
    if not species:
        raise ValueError("no species")
    return species


def eps_cold(k, omega, species):
    """Cold relativistic dielectric function (longitudinal mass gamma_s^3 m_s):

        eps = 1 - Sum_s omega_ps^2 / (gamma_s^3 (omega - k v_s)^2)

    (e.g. Birdsall & Langdon, *Plasma Physics via Computer Simulation* (1991), sec. 5.10, with the
    relativistic mass gamma^3 m for motion along the drift).  Warm species are taken cold.
    """
    k, omega = np.broadcast_arrays(np.asarray(k, float), np.asarray(omega, complex))
    return _eps(_terms(_species_list(species), "cold"), k, omega)[0]


def cold_roots(k, species) -> np.ndarray:
    """All 2N roots omega(k) of :func:`eps_cold` (N distinct drifts), shape (len(k), 2N).

    No initial guess: the roots of the polynomial eps * Prod (omega - k v_s)^2 (companion matrix).
    """
    return _rational_roots(_terms(_species_list(species), "cold"), k)


def eps_waterbag(k, omega, species):
    """Dielectric function with waterbag species, exact in the relativistic kinematics:

        eps = 1 - Sum_s omega_ps^2 [(v_+ - v_-)/(u_+ - u_-)] / ((omega - k v_-)(omega - k v_+)),

    since f_s' = (delta(u - u_-) - delta(u - u_+))/(u_+ - u_-) for f_s flat on [u_-, u_+]
    (waterbag model: Berk, Nielsen & Roberts, Phys. Fluids 13, 980 (1970); edges from
    :func:`waterbag_edges`).  Cold species keep their cold term; a warm Juttner species becomes the
    waterbag of equal rest-frame <u'^2> (:func:`equivalent_waterbag_spread`).  Tends to
    :func:`eps_cold` as the spread -> 0 ((v_+ - v_-)/(u_+ - u_-) -> dv/du = gamma^-3).
    """
    k, omega = np.broadcast_arrays(np.asarray(k, float), np.asarray(omega, complex))
    return _eps(_terms(_species_list(species), "waterbag"), k, omega)[0]


def waterbag_roots(k, species) -> np.ndarray:
    """All roots omega(k) of :func:`eps_waterbag` (polynomial, companion matrix), shape (nk, 2N)."""
    return _rational_roots(_terms(_species_list(species), "waterbag"), k)


def eps_maxwellian(k, omega, species):
    """Dielectric function with (drifting, non-relativistic) Maxwellian species:

        eps = 1 + Sum_s (omega_s^2 / (k^2 v_ts^2)) [1 + zeta_s Z(zeta_s)],
        zeta_s = (omega - k v_s) / (sqrt(2) k v_ts),

    (e.g. Krall & Trivelpiece (1973) sec. 8.6; Stix, *Waves in Plasmas* (1992) ch. 8), valid for
    any complex omega (Landau contour).  Parameters from :func:`maxwellian_parameters`; cold and
    waterbag species keep their exact terms.
    """
    k, omega = np.broadcast_arrays(np.asarray(k, float), np.asarray(omega, complex))
    return _eps(_terms(_species_list(species), "maxwellian"), k, omega)[0]


def eps_juttner(k, omega, species, landau: bool = False):
    """Dielectric function with drifting 1D Maxwell-Juttner species, by quadrature:

        chi_s = (omega_ps^2 / k) Int f_s'(u) / (omega - k v(u)) du,
        f_s(u) = exp(-Gamma_d (gamma - beta_d u)/theta) / (2 Gamma_d K_1(1/theta)),

    (the relativistic 1D Vlasov susceptibility, e.g. Bret, Gremillet & Dieckmann, Phys. Plasmas 17,
    120501 (2010), with the distribution of :func:`juttner_distribution`).  Exact for Im omega >= 0
    (quadrature with the pole subtracted, see :class:`_Juttner`).  For Im omega < 0 the Landau
    continuation is needed; it is computed only with ``landau=True`` (used internally while
    iterating) and is otherwise refused with a ValueError, since damped Juttner roots are not part
    of the supported results.
    """
    k, omega = np.broadcast_arrays(np.asarray(k, float), np.asarray(omega, complex))
    if not landau and np.any(omega.imag < 0):
        raise ValueError("eps_juttner: Im omega < 0 (a damped root) needs the Landau continuation, "
                         "which the Juttner model does not support; use the maxwellian model "
                         "(plasma dispersion function) for damped roots")
    return _eps(_terms(_species_list(species), "juttner"), k, omega)[0]


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

    def _continue(self, k, best, reach: int = 1):
        """Continuation over k: a root seeds Newton at the next ``reach`` k on either side (omega
        scaled with k), and every improvement seeds again, until nothing improves."""
        nk = k.size
        if nk < 2:
            return best
        def sources(mask):     # growing-only models continue from growing roots only
            return mask if self.damped else mask & (best.imag > GROWTH_TOL)

        changed = sources(np.isfinite(best))
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


# ============================================================================================
# The deck-level result
# ============================================================================================
@dataclass(frozen=True)
class FastestMode:
    k: float          # omega_p/c
    growth: float     # omega_p
    omega_r: float    # omega_p


@dataclass(frozen=True)
class BoxMode:
    mode: int
    k: float
    growth: float     # omega_p; 0.0 when stable (negative: damping rate, maxwellian model only)
    omega_r: float | None
    maxwellian_growth: float | None = None   # juttner model only: the maxwellian model's rate,
                                             # which gives the Landau damping of stable modes


def _num(x):
    if x is None:
        return None
    x = float(x)
    return x if math.isfinite(x) else None


@dataclass
class Dispersion:
    """Linear theory of one deck: the growth curve, the fastest mode, the band and the box modes.

    Normalised units: k in omega_p/c, growth and omega_r in omega_p.  ``growth`` is 0.0 where the
    model finds no growing root; only the maxwellian model gives negative values (Landau damping
    rate of the least damped root).  ``omega_r`` is the real frequency of the root reported (for
    stable modes of the cold/waterbag models: the highest real frequency).
    """
    model: str
    k: np.ndarray
    growth: np.ndarray
    omega_r: np.ndarray
    fastest: FastestMode | None
    unstable_band: tuple[float, float] | None
    unstable_bands: list[tuple[float, float]]
    box_modes: list[BoxMode]
    box_length: float | None = None
    density_cm3: float | None = None
    time_end: float | None = None
    species: tuple[str, ...] = ()
    notes: list[str] = field(default_factory=list)

    @classmethod
    def from_dict(cls, d: dict) -> "Dispersion":
        """The Dispersion of a :meth:`to_dict` object (theory.json)."""
        f = d.get("fastest")
        curve = d.get("curve") or {}
        nan = lambda v: np.nan if v is None else v  # noqa: E731
        return cls(model=d["model"],
                   k=np.array([nan(v) for v in curve.get("k", [])], float),
                   growth=np.array([nan(v) for v in curve.get("growth", [])], float),
                   omega_r=np.array([nan(v) for v in curve.get("omega_r", [])], float),
                   fastest=FastestMode(f["k"], f["growth"], f["omega_r"]) if f else None,
                   unstable_band=tuple(d["unstable_band"]) if d.get("unstable_band") else None,
                   unstable_bands=[tuple(b) for b in d.get("unstable_bands") or []],
                   box_modes=[BoxMode(int(m["mode"]), m["k"],
                                      0.0 if m.get("growth") is None else m["growth"],
                                      m.get("omega_r"), m.get("maxwellian_growth"))
                              for m in d.get("box_modes") or []],
                   box_length=d.get("box_length"), density_cm3=d.get("density_cm3"),
                   time_end=(f["efoldings_in_run"] / f["growth"]
                             if f and f.get("efoldings_in_run") and f.get("growth") else None),
                   species=tuple(d.get("species") or ()),
                   notes=list(d.get("notes") or []))

    def to_dict(self, density_cm3: float | None = None) -> dict:
        """The JSON object of ``streamsim theory --json`` (plain floats and lists, no NaN)."""
        from . import units
        n = density_cm3 if density_cm3 is not None else self.density_cm3
        fast = None
        if self.fastest is not None:
            f = self.fastest
            fast = {"k": f.k, "growth": f.growth, "omega_r": f.omega_r,
                    "wavelength": 2 * math.pi / f.k,
                    "growth_time": 1.0 / f.growth,
                    "growth_time_ns": None, "growth_time_efold_ns": None,
                    "energy_growth_time_ns": None, "wavelength_cm": None, "k_per_cm": None,
                    "efoldings_in_run": _num(f.growth * self.time_end) if self.time_end else None}
            if n:
                t = units.growth_time_ns(f.growth, n)
                fast.update(growth_time_ns=t, growth_time_efold_ns=t, energy_growth_time_ns=t / 2,
                            wavelength_cm=units.length_cm(2 * math.pi / f.k, n),
                            k_per_cm=units.wavenumber_per_cm(f.k, n))
        out = {
            "model": self.model,
            "units": "k in omega_p/c, growth and omega_r in omega_p, wavelength in c/omega_p, "
                     "growth_time in 1/omega_p (field amplitude e-folding), unless the key says "
                     "otherwise (_ns, _cm, _per_cm)",
            "density_cm3": _num(n),
            "species": list(self.species),
            "fastest": fast,
            "unstable_band": list(self.unstable_band) if self.unstable_band else None,
            "unstable_bands": [list(b) for b in self.unstable_bands],
            "box_length": _num(self.box_length),
            "box_modes": [dict({"mode": m.mode, "k": m.k, "growth": _num(m.growth),
                                "omega_r": _num(m.omega_r)},
                               **({} if m.maxwellian_growth is None else
                                  {"maxwellian_growth": _num(m.maxwellian_growth)}))
                          for m in self.box_modes],
            "curve": {"k": [_num(x) for x in self.k], "growth": [_num(x) for x in self.growth],
                      "omega_r": [_num(x) for x in self.omega_r]},
            "notes": list(self.notes),
        }
        if n:
            out["omega_p_rad_s"] = units.omega_p_rad_s(n)
            out["skin_depth_cm"] = units.skin_depth_cm(n)
            for d, m in zip(out["box_modes"], self.box_modes):
                d["growth_time_ns"] = _num(units.growth_time_ns(m.growth, n)) if m.growth > 0 else None
                d["wavelength_cm"] = units.length_cm(2 * math.pi / m.k, n)
        return out


def theory_for_deck(deck, model: str | None = None, kmax: float | None = None,
                    nk: int = 400) -> Dispersion:
    """Linear theory for a deck: growth curve on nk points in (0, kmax], fastest mode, unstable
    band and the box modes k_m = 2 pi m / L, m = 1..deck.output.modes.

    ``model`` defaults to :func:`model_for_species`; ``kmax`` (omega_p/c) to 1.5 x the top of the
    cold unstable band.
    """
    species = _species_list(deck.species)
    implied = model_for_species(species)
    model = model or implied
    if model not in MODELS:
        raise ValueError(f"unknown model {model!r}; choose one of {', '.join(MODELS)}")
    notes = []
    if model != implied:
        notes.append(f"model {model!r} requested; the deck implies {implied!r}")
    if model == "cold" and implied != "cold":
        notes.append("cold model: temperatures and spreads are ignored")
    if model == "waterbag" and any(_is_warm_juttner(s) for s in species):
        notes.append("waterbag model: each warm Juttner species is the waterbag of equal "
                     "rest-frame <u'^2>")
    if model == "maxwellian":
        notes.append("maxwellian model: warm species as drifting Maxwellians with "
                     "v_th = sqrt(theta)/Gamma^2 and omega_p^2/Gamma^3; negative growth = Landau "
                     "damping rate of the least damped root")
    if model == "juttner":
        notes.append("juttner model: growing roots only; growth 0.0 where no growing root "
                     "(damped Juttner roots not supported)")
        for s in species:
            if s.distribution == "juttner" and 0 < s.theta <= THETA_COLD:
                notes.append(f"species {s.name}: theta <= {THETA_COLD:g}, treated as cold")
    solver = _Solver(species, model)
    kmax_used = float(kmax) if kmax else _auto_kmax(species)
    helper = _Solver(species, "maxwellian") if model == "juttner" else None
    k, w, g, fast = _curve_and_fastest(solver, kmax_used, int(nk), extend=kmax is None,
                                       helper=helper)
    if model == "juttner" and fast is None:
        other = fastest_mode(species, "maxwellian")
        if other is not None and other[1] > 10 * GROWTH_TOL:
            notes.append("no growing Juttner root was found (also from the maxwellian roots as "
                         f"seeds) although the maxwellian model grows at {other[1]:.4g} omega_p "
                         f"(k = {other[0]:.4g}); the Juttner result may be stable by relativistic "
                         "effects or the root was missed: compare with --model maxwellian")
    fastest = FastestMode(*map(float, (fast[0], fast[1].imag, fast[1].real))) if fast else None
    bands = _bands_from(solver, k, w, g)
    band = None
    if fastest is not None:
        for b in bands:
            if b[0] - 1e-12 <= fastest.k <= b[1] + 1e-12:
                band = b
        if band is None and bands:
            band = min(bands, key=lambda b: min(abs(b[0] - fastest.k), abs(b[1] - fastest.k)))

    length = float(deck.box.length)
    nmodes = int(getattr(deck.output, "modes", 0) or min(deck.box.cells // 2, 64))
    m = np.arange(1, nmodes + 1)
    km = 2 * math.pi * m / length
    # seeds: the curve's root at the nearest curve point, scaled with k
    j = np.clip(np.searchsorted(k, km), 0, k.size - 1)
    extra = np.where(np.isfinite(w[j]), w[j] * km / k[j], np.nan) if not solver.rational else None
    wm = solver.best(km, extra=extra)
    gm = solver.growth(wm)
    alt = [None] * nmodes
    if model == "juttner":
        mx = _Solver(species, "maxwellian")
        alt = list(mx.growth(mx.best(km)))
        notes.append("box_modes[].maxwellian_growth: the same modes in the maxwellian model "
                     "(negative = Landau damping rate), since the juttner model gives growing "
                     "roots only")
    modes = [BoxMode(int(mi), float(ki), float(gi) if np.isfinite(gi) else 0.0,
                     float(wi.real) if np.isfinite(wi) else None,
                     None if ai is None or not np.isfinite(ai) else float(ai))
             for mi, ki, gi, wi, ai in zip(m, km, gm, wm, alt)]
    if length and fastest is not None:
        notes.append(f"box holds {length * fastest.k / (2 * math.pi):.4g} fastest wavelengths")
    return Dispersion(model=model, k=k, growth=g, omega_r=np.where(np.isfinite(w), w.real, np.nan),
                      fastest=fastest, unstable_band=band, unstable_bands=bands, box_modes=modes,
                      box_length=length, density_cm3=float(deck.units.density_cm3),
                      time_end=float(deck.time.end), species=tuple(s.name for s in species),
                      notes=notes)
