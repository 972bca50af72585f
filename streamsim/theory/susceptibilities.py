"""Susceptibilities chi_s of one species each, and the dielectric function eps = 1 + Sum chi_s.

One term per species kind, each with chi(k, omega) -> (chi, d chi/d omega, d chi/d k):

``_Rational``  cold (delta function) and waterbag species: a rational function of omega.
``_Maxwell``   drifting non-relativistic Maxwellian through the plasma dispersion function Z.
``_Juttner``   drifting 1D Maxwell-Juttner by Gauss-Legendre quadrature with the pole subtracted.

:func:`model_for_species` picks the model a deck's species imply; :func:`_terms` builds the terms of
a model.  Normalised units (k in omega_p/c, omega in omega_p, u = gamma*beta, v in c).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .tabulated import TabulatedTerm, is_table, table_seed_beams, table_waterbag
from .formulas import (equivalent_waterbag_spread, juttner_normalisation, maxwellian_parameters,
                       one_plus_zeta_z, waterbag_edges)

__all__ = [
    "MODELS", "THETA_COLD", "model_for_species",
    "eps_cold", "eps_waterbag", "eps_maxwellian", "eps_juttner",
]

MODELS = ("cold", "waterbag", "maxwellian", "juttner", "table")

#: below this temperature a Juttner species is treated as cold (the quadrature window would be
#: narrower than the resolution of double precision in the rapidity).
THETA_COLD = 1.0e-12

_NODES = 48          # Gauss-Legendre nodes per Juttner species (64 for theta >= 1); converged
                     # to ~1e-14 against 256 nodes for 1e-6 <= theta <= 3, growing or damped
_WINDOW = 40.0       # the Juttner window keeps exp(-(cosh xi - 1)/theta) >= exp(-40)


def _is_warm_juttner(s) -> bool:
    return s.distribution == "juttner" and s.theta > 0.0


def model_for_species(species) -> str:
    """The model a set of species implies.

    "cold" if every species is cold; "waterbag" if any is a waterbag and the rest are cold;
    "juttner" if any species is a warm Juttner (also when waterbags are present: the Juttner model
    keeps their exact rational terms); "table" if any species is tabulated (the other species keep
    their exact terms: Juttner by quadrature, cold and waterbag rational).  "maxwellian" is only used on request.
    """
    species = list(species)
    if any(is_table(s) for s in species):
        return "table"
    if any(_is_warm_juttner(s) for s in species):
        return "juttner"
    if any(s.distribution == "waterbag" and s.spread_u > 0 for s in species):
        return "waterbag"
    return "cold"



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
        r, dr = one_plus_zeta_z(zeta)
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
        self.norm = 1.0 / juttner_normalisation(drift_u, theta)
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
    if model not in MODELS and model != "beams":
        raise ValueError(f"unknown model {model!r}; choose one of {', '.join(MODELS)}")
    if model == "maxwellian" and any(is_table(s) for s in species):
        raise ValueError("the maxwellian model has no form for a tabulated species; use the "
                         "table model (growing roots only)")
    out = []
    for s in species:
        warm = _is_warm_juttner(s) and s.theta > THETA_COLD
        if is_table(s):
            # "table": the exact term; the others are stand-ins that seed its roots (cold: one
            # beam at the mean u; waterbag: flat of equal mean and rms u; beams: six cold beams
            # on equal-probability slices)
            if model == "table":
                out.append(TabulatedTerm(s.omega_p2, s.table.v, s.table.f))
            elif model == "beams":
                out.extend(_Rational(c, v, v) for c, v in table_seed_beams(s))
            elif model == "cold":
                m = s.table.moments()[0]
                g = math.sqrt(1.0 + m * m)
                out.append(_Rational(s.omega_p2 / g**3, m / g, m / g))
            else:
                out.append(_Rational(*table_waterbag(s)))
        elif model == "beams":
            out.append(_rational_term(s, "waterbag"))
        elif model == "maxwellian" and warm:
            a, v, vt = maxwellian_parameters(s)
            out.append(_Maxwell(a, v, vt))
        elif model in ("juttner", "table") and warm:
            out.append(_Juttner(s.omega_p2, s.drift_u, s.theta))
        else:
            out.append(_rational_term(s, "cold" if model == "cold" else "waterbag"))
    return _merge(out)


def _merge(terms):
    terms = _merge_tables(terms)
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


def _merge_tables(terms):
    """Tabulated terms whose G vanishes at both ends (to 1e-12 of its peak) merged into one: the
    sum of piecewise-linear functions is piecewise linear on the union of their rows, so the
    merged term is exact and costs one pass over the union (half the work for a pair of species
    tabulated on one grid of velocities)."""
    tabs = [t for t in terms if isinstance(t, TabulatedTerm)
            and max(abs(t.G0), abs(t.GN)) <= 1e-12 * float(np.max(np.abs(t.G)))]
    if len(tabs) < 2:
        return terms
    v = np.unique(np.concatenate([t.v for t in tabs]))
    G = sum(np.interp(v, t.v, t.G, left=0.0, right=0.0) for t in tabs)
    rest = [t for t in terms if not any(t is x for x in tabs)]
    return [TabulatedTerm(1.0, v, G)] + rest


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

