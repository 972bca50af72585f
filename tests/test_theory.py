"""Linear theory against published and analytic values (source named beside each check)."""
from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from scipy import integrate, optimize, special

from streamsim import theory, units
from streamsim.deck import Species, load_deck
from streamsim.validation import references


def species(name, charge, density, *, beta=None, u=0.0, theta=0.0, dist=None, spread=0.0):
    if beta is not None:
        u = beta / math.sqrt(1.0 - beta * beta)
    if dist is None:
        dist = "waterbag" if spread > 0 else ("juttner" if theta > 0 else "cold")
    return Species(name=name, charge=charge, mass=1.0, density=density, drift_u=u, theta=theta,
                   distribution=dist, spread_u=spread, particles_per_cell=1, loading="quiet")


def pair(beta=0.1, theta=0.0, u=None):
    if u is not None:
        return [species("e", -1.0, 0.5, u=u, theta=theta), species("p", 1.0, 0.5, u=-u, theta=theta)]
    return [species("e", -1.0, 0.5, beta=beta, theta=theta),
            species("p", 1.0, 0.5, beta=-beta, theta=theta)]


# --------------------------------------------------------------------------------------------
# Cold beams
# --------------------------------------------------------------------------------------------
@pytest.mark.parametrize("gamma0", [1.0 / math.sqrt(1 - 0.01), 1.2, 2.0, 3.0, 5.0])
def test_symmetric_cold_beams_max_growth(gamma0):
    u0 = math.sqrt(gamma0**2 - 1)
    v0 = u0 / gamma0
    k, g, wr = theory.fastest_mode(pair(u=u0))
    wb = math.sqrt(0.5) * gamma0**-1.5          # omega_p,beam gamma0^(-3/2)
    # analytic: gamma_max = omega_b/2 at k v0 = (sqrt3/2) omega_b (Birdsall & Langdon 1991, sec. 5.10)
    assert g == pytest.approx(wb / 2, rel=1e-8)
    assert k * v0 == pytest.approx(math.sqrt(3) / 2 * wb, rel=1e-8)
    assert abs(wr) < 1e-8                         # purely growing in the centre-of-momentum frame


def test_symmetric_cold_beams_band_edge():
    beta = 0.1
    g0 = 1 / math.sqrt(1 - beta**2)
    wb = math.sqrt(0.5 / g0**3)
    (lo, hi), = theory.unstable_bands(pair(beta), "cold")
    # analytic: unstable for k v0 < sqrt2 omega_b (Birdsall & Langdon 1991, sec. 5.10)
    assert hi * beta == pytest.approx(math.sqrt(2) * wb, rel=1e-8)
    assert lo == 0.0


def test_cold_roots_are_roots_of_eps_cold():
    # eps_cold written out independently: 1 - sum wp^2/(gamma^3 (w - k v)^2) (Birdsall & Langdon
    # 1991, sec. 5.10, with the longitudinal mass gamma^3 m of Bret, Gremillet & Dieckmann 2010)
    sp = pair(0.3) + [species("b", -1.0, 0.05, beta=0.6)]
    k = np.array([0.5, 2.0, 4.0])
    roots = theory.cold_roots(k, sp)
    assert roots.shape == (3, 6)
    for kk, row in zip(k, roots):
        for w in row:
            e = 1 - sum(s.omega_p2 / (s.drift_gamma**3 * (w - kk * s.drift_beta) ** 2) for s in sp)
            scale = sum(s.omega_p2 / abs(s.drift_gamma**3 * (w - kk * s.drift_beta) ** 2) for s in sp)
            assert abs(e) < 1e-9 * (1 + scale)


def _weak_beam_exact(ratio, beta):
    """Max growth of the cold beam-plasma relation 1 - 1/w^2 - alpha/(w - kv)^2 = 0, alpha =
    ratio/gamma_b^3 (omega_p = 1): the root of references.weak_beam_root (quartic by numpy.roots),
    Newton-polished on the rational form (the quartic's roots cluster for a weak beam), maximised
    over k by scipy's bounded scalar minimiser."""
    alpha = ratio * (1 - beta**2) ** 1.5

    def g(k):
        w = references.weak_beam_root(k, ratio, beta)
        kv = k * beta
        for _ in range(3):
            e = 1 - 1 / w**2 - alpha / (w - kv) ** 2
            de = 2 / w**3 + 2 * alpha / (w - kv) ** 3
            w = w - e / de
        return w.imag
    r = optimize.minimize_scalar(lambda x: -g(x), bounds=(0.5 / beta, 1.5 / beta),
                                 method="bounded", options={"xatol": 1e-12 / beta})
    return -r.fun


@pytest.mark.parametrize("nb", [1e-3, 1e-4, 1e-6, 1e-9])
def test_weak_cold_beam_into_cold_plasma(nb):
    beta = 0.1
    gb = 1 / math.sqrt(1 - beta**2)
    sp = [species("plasma", -1.0, 1.0), species("beam", -1.0, nb, beta=beta)]
    k, g, wr = theory.fastest_mode(sp, "cold")
    # the same cold dispersion relation solved independently (beam mass gamma_b^3 m: only
    # n_b/gamma_b^3 enters; Bret, Gremillet & Dieckmann 2010)
    assert g == pytest.approx(_weak_beam_exact(nb, beta), rel=1e-7)
    # weak-beam limit: gamma_max -> (sqrt3 / 2^(4/3)) (n_b/n_p)^(1/3) omega_p / gamma_b
    # (e.g. Krall & Trivelpiece 1973, sec. 9.4; references.weak_beam_law), at k v_b -> omega_p.
    # The limit is approached with a relative correction of order (n_b/n_p)^(1/3) (the next term
    # of the same expansion in delta = omega - omega_p): at n_b/n_p = 1e-3 the exact root lies
    # 3.8 % below it, so a 2 % agreement is reached only near n_b/n_p = 1e-4.
    limit = references.weak_beam_law(nb, beta)
    assert abs(g / limit - 1) < 0.5 * nb ** (1 / 3)
    if nb <= 1e-4:
        assert g == pytest.approx(limit, rel=0.02)
    assert k * beta == pytest.approx(1.0, abs=nb ** (1 / 3))


def test_stable_cold_plasma():
    assert theory.fastest_mode([species("e", -1.0, 1.0)]) is None


# --------------------------------------------------------------------------------------------
# Plasma dispersion function and Maxwellian roots
# --------------------------------------------------------------------------------------------
def test_z_against_plasmapy():
    pdisp = pytest.importorskip("plasmapy.dispersion")
    rng = np.random.default_rng(11)
    zeta = rng.uniform(-6, 6, 200) + 1j * rng.uniform(-3, 3, 200)
    zeta = np.concatenate([zeta, [0.0, 1.0, -2.5, 0.5j, 3 - 0.1j, 40.0 + 1j, -35 + 0.5j]])
    ours = theory.plasma_dispersion_z(zeta)
    ref = np.asarray(pdisp.plasma_dispersion_func(zeta))  # reference library (PlasmaPy)
    assert np.max(np.abs(ours - ref) / np.maximum(1.0, np.abs(ref))) < 1e-10
    dref = np.asarray(pdisp.plasma_dispersion_func_deriv(zeta))
    dours = theory.plasma_dispersion_z_prime(zeta)
    assert np.max(np.abs(dours - dref) / np.maximum(1.0, np.abs(dref))) < 1e-10


@pytest.mark.parametrize("k_lambda", sorted(references.PUBLISHED_LANDAU_ROOTS))
def test_landau_roots(k_lambda):
    tabulated = references.PUBLISHED_LANDAU_ROOTS[k_lambda]
    vt = 0.01
    sp = [species("e", -1.0, 1.0, theta=vt**2)]
    roots = theory.maxwellian_roots(k_lambda / vt, sp)
    w = roots[0]                                  # least damped
    # widely tabulated Landau roots (e.g. Canosa, J. Comput. Phys. 13, 158 (1973); from memory)
    assert abs(w.real - tabulated.real) < 1e-3
    assert abs(w.imag - tabulated.imag) < 1e-3
    # an independent root of the Maxwellian eps with wofz (Fried & Conte 1961), by scipy's secant
    # from the tabulated value (references.maxwellian_root)
    root = references.maxwellian_root(k_lambda, guess=tabulated)
    assert abs(w - root) < 1e-9
    assert abs(references.maxwellian_eps(w, k_lambda)) < 1e-9


@pytest.mark.parametrize("k_lambda", [0.02, 0.05, 0.1])
def test_bohm_gross(k_lambda):
    vt = 0.01
    sp = [species("e", -1.0, 1.0, theta=vt**2)]
    w = theory.maxwellian_roots(k_lambda / vt, sp)[0]
    # Bohm-Gross: omega^2 = omega_p^2 + 3 k^2 v_th^2 (Bohm & Gross, Phys. Rev. 75, 1851 (1949));
    # the next term of the small-k lambda_D expansion is O(k^4 lambda_D^4) (from memory)
    bg = references.bohm_gross(k_lambda) ** 2
    assert abs(w.real**2 - bg) < 10 * k_lambda**4
    assert abs(w.imag) < 1e-6                      # Landau damping exponentially small here


def test_maxwellian_roots_of_the_two_species_eps():
    # the maxwellian eps written out with wofz for two drifting species (Krall & Trivelpiece 1973,
    # sec. 8.6; Z = i sqrt(pi) w, Fried & Conte 1961)
    sp = pair(0.1, theta=1e-4)
    k = 5.0
    for w in theory.maxwellian_roots(k, sp):
        e = 1.0
        for s in sp:
            a, v, vt = theory.maxwellian_parameters(s)
            zeta = (w - k * v) / (math.sqrt(2) * k * vt)
            e += a / (k * vt) ** 2 * (1 + zeta * 1j * math.sqrt(math.pi) * special.wofz(zeta))
        assert abs(e) < 1e-7


# --------------------------------------------------------------------------------------------
# Juttner quadrature
# --------------------------------------------------------------------------------------------
def _chi_juttner_quad(k, w, u_d, theta):
    """(1/k) Int f'(u)/(w - k v(u)) du by adaptive scipy.integrate.quad, f the lab-frame Juttner
    exp(-G (gamma - beta u)/theta)/(2 G K_1(1/theta)) (Juttner 1911, boosted; normalisation from
    Abramowitz & Stegun 9.6.24; K_1 from scipy.special.kv)."""
    g_d = math.sqrt(1 + u_d**2)
    b_d = u_d / g_d
    norm = 2 * g_d * special.kv(1, 1 / theta)

    def fp(u):
        g = math.sqrt(1 + u * u)
        return -(g_d / theta) * (u / g - b_d) * math.exp(-g_d * (g - b_d * u) / theta) / norm

    half = 30 * math.sqrt(theta) * g_d + 30 * theta * g_d
    lo, hi = u_d - half, u_d + half
    re = integrate.quad(lambda u: (fp(u) / (w - k * u / math.sqrt(1 + u * u))).real, lo, hi,
                        points=[u_d], limit=500, epsabs=1e-13, epsrel=1e-12)[0]
    im = integrate.quad(lambda u: (fp(u) / (w - k * u / math.sqrt(1 + u * u))).imag, lo, hi,
                        points=[u_d], limit=500, epsabs=1e-13, epsrel=1e-12)[0]
    return (re + 1j * im) / k


@pytest.mark.parametrize("u_d, theta, k, w", [
    (0.4, 0.01, 1.6, 0.45 + 0.04j), (0.0, 0.02, 1.0, 0.3 + 0.01j),
    (2.0, 0.5, 0.5, 0.4 + 0.001j), (5.0, 0.1, 0.3, 0.29 + 1e-5j), (-0.5, 0.005, 1.2, -0.5 + 0.2j)])
def test_juttner_eps_against_adaptive_quadrature(u_d, theta, k, w):
    sp = [species("e", -1.0, 1.0, u=u_d, theta=theta)]
    ours = theory.eps_juttner(k, w, sp) - 1.0
    ref = _chi_juttner_quad(k, w, u_d, theta)     # direct adaptive quadrature of the definition
    assert abs(ours - ref) < 1e-9 * max(1.0, abs(ref))


def test_juttner_normalisation():
    # Int f du = 1 with the K_1 normalisation (Abramowitz & Stegun 9.6.24), by adaptive quad
    for u_d, theta in [(0.0, 1e-3), (1.5, 0.2), (-3.0, 2.0)]:
        val = integrate.quad(lambda u: theory.juttner_distribution(u, u_d, theta), -np.inf,
                             np.inf, epsabs=1e-13)[0]
        assert val == pytest.approx(1.0, abs=1e-9)


def test_juttner_u2_rest_tends_to_theta():
    # <u'^2> -> theta as theta -> 0 (the non-relativistic Maxwellian limit of the Juttner
    # distribution, Juttner 1911); exact by adaptive quadrature for theta = 0.3
    assert theory.juttner_u2_rest(1e-6) == pytest.approx(1e-6, rel=1e-5)
    th = 0.3
    num = integrate.quad(lambda u: u * u * math.exp(-(math.sqrt(1 + u * u) - 1) / th), -60, 60)[0]
    den = integrate.quad(lambda u: math.exp(-(math.sqrt(1 + u * u) - 1) / th), -60, 60)[0]
    assert theory.juttner_u2_rest(th) == pytest.approx(num / den, rel=1e-10)


def test_juttner_tends_to_cold():
    # cold limit: gamma_max = omega_b/2, omega_b^2 = omega_pb^2/gamma0^3 (Birdsall & Langdon 1991,
    # sec. 5.10); the theta -> 0 limit of the Juttner distribution is the cold beam (from memory)
    g0 = 1 / math.sqrt(1 - 0.01)
    cold = math.sqrt(0.5 / g0**3) / 2
    diffs = []
    for theta in (1e-5, 1e-7, 1e-9):
        fast = theory.fastest_mode(pair(0.1, theta), "juttner")
        diffs.append(abs(fast[1] - cold) / cold)
    assert diffs[-1] < 1e-6
    assert diffs[0] > diffs[1] > diffs[2]


def test_juttner_close_to_maxwellian_for_small_theta_and_beta():
    sp = pair(0.05, theta=1e-4)
    j = theory.fastest_mode(sp, "juttner")
    m = theory.fastest_mode(sp, "maxwellian")
    # theta << 1, beta << 1: the Juttner is the Maxwellian with v_th^2 = theta (non-relativistic
    # limit of Juttner 1911)
    assert j[1] == pytest.approx(m[1], rel=1e-3)
    assert j[0] == pytest.approx(m[0], rel=1e-3)


def test_juttner_landau_continuation_matches_maxwellian_landau_root():
    theta = 1e-6
    vt = math.sqrt(theta)
    sp = [species("e", -1.0, 1.0, theta=theta)]
    k = 0.4 / vt
    root = optimize.newton(lambda w: complex(theory.eps_juttner(k, w, sp, landau=True)),
                           references.PUBLISHED_LANDAU_ROOTS[0.4], tol=1e-12)
    # tabulated Landau root at k lambda_D = 0.4 (as in test_landau_roots, from memory)
    assert abs(root - references.PUBLISHED_LANDAU_ROOTS[0.4]) < 1e-3


def test_juttner_refuses_damped_without_landau():
    sp = [species("e", -1.0, 1.0, theta=1e-4)]
    with pytest.raises(ValueError, match="damped"):
        theory.eps_juttner(40.0, 1.28 - 0.06j, sp)


# --------------------------------------------------------------------------------------------
# Waterbag
# --------------------------------------------------------------------------------------------
def test_single_waterbag_dispersion():
    # a waterbag on [u_-, u_+] at rest: eps = 1 - c/(w^2 - k^2 v_e^2), c = wp^2 (2 v_e)/(2 u_e)
    # (Berk, Nielsen & Roberts 1970), so omega^2 = c + k^2 v_e^2 exactly
    d = 0.3
    sp = [species("e", -1.0, 1.0, spread=d)]
    ve = d / math.sqrt(1 + d * d)
    for k in (0.5, 2.0):
        w = np.sort(theory.waterbag_roots([k], sp)[0].real)
        assert w[-1] ** 2 == pytest.approx(ve / d + k * k * ve * ve, rel=1e-12)


def test_waterbag_tends_to_cold():
    cold = theory.fastest_mode(pair(0.2), "cold")
    sp = [species("e", -1.0, 0.5, beta=0.2, spread=1e-7), species("p", 1.0, 0.5, beta=-0.2, spread=1e-7)]
    wb = theory.fastest_mode(sp)
    assert theory.model_for_species(sp) == "waterbag"
    assert wb[1] == pytest.approx(cold[1], rel=1e-6)     # (v+ - v-)/(u+ - u-) -> gamma^-3


def test_waterbag_edges_boost():
    # Lorentz boost of the edges u' = +-Delta (special relativity, u = G(u' + b g'))
    lo, hi = theory.waterbag_edges(1.0, 0.5)
    G, b = math.sqrt(2), 1 / math.sqrt(2)
    assert hi == pytest.approx(G * (0.5 + b * math.sqrt(1.25)))
    assert lo == pytest.approx(G * (-0.5 + b * math.sqrt(1.25)))


# --------------------------------------------------------------------------------------------
# Model choice, deck level, units
# --------------------------------------------------------------------------------------------
def test_model_for_species():
    cold = species("a", -1.0, 1.0)
    wb = species("b", -1.0, 1.0, spread=0.1)
    jt = species("c", -1.0, 1.0, theta=0.01)
    assert theory.model_for_species([cold, cold]) == "cold"
    assert theory.model_for_species([cold, wb]) == "waterbag"
    assert theory.model_for_species([cold, jt]) == "juttner"
    assert theory.model_for_species([wb, jt]) == "juttner"


def test_default_deck_to_dict_contract():
    deck = load_deck(None)
    disp = theory.theory_for_deck(deck)
    d = disp.to_dict()
    json.dumps(d, allow_nan=False)
    assert d["model"] == "cold"
    for key in ("k", "growth", "omega_r", "growth_time_ns", "wavelength_cm"):
        assert isinstance(d["fastest"][key], float)
    assert len(d["unstable_band"]) == 2
    assert len(d["box_modes"]) == deck.output.recorded_modes
    assert [m["mode"] for m in d["box_modes"]] == list(range(1, deck.output.recorded_modes + 1))
    for m in d["box_modes"]:
        assert set(m) >= {"mode", "k", "growth", "omega_r"}
        assert m["k"] == pytest.approx(2 * math.pi * m["mode"] / deck.box.length)
    # the default deck's beams: beta = 0.1 each way, density 0.5 each (DEFAULT_DECK)
    g0 = 1 / math.sqrt(1 - 0.01)
    wb = math.sqrt(0.5 / g0**3)
    assert d["fastest"]["growth"] == pytest.approx(wb / 2, rel=1e-8)      # Birdsall & Langdon
    # analytic growth of a box mode from the symmetric cold quartic (Birdsall & Langdon 1991):
    # gamma^2 = -(k^2 v0^2 + wb^2 - wb sqrt(wb^2 + 4 k^2 v0^2)) (references.cold_symmetric_growth)
    for m in d["box_modes"][:5]:
        exact = references.cold_symmetric_growth(m["k"], 0.1, wb)
        assert m["growth"] == pytest.approx(exact, rel=1e-9)
    # physical units: 1/(gamma omega_p) with omega_p = 5.64e4 sqrt(n) rad/s (NRL Formulary)
    wp = 5.64e4 * math.sqrt(deck.units.density_cm3)
    assert d["fastest"]["growth_time_ns"] == pytest.approx(1e9 / (wb / 2 * wp), rel=2e-3)
    lam_cm = 2 * math.pi / d["fastest"]["k"] * 2.998e10 / wp
    assert d["fastest"]["wavelength_cm"] == pytest.approx(lam_cm, rel=2e-3)


def test_deck_fastest_wavelengths_uses_theory():
    raw = {"title": "t", "box": {"fastest_wavelengths": 3, "cells": 64},
           "species": [{"name": "e", "charge": -1.0, "density": 0.5, "drift_beta": 0.2},
                       {"name": "p", "charge": 1.0, "density": 0.5, "drift_beta": -0.2}]}
    deck = load_deck(raw)
    g0 = 1 / math.sqrt(1 - 0.04)
    kfast = math.sqrt(3) / 2 * math.sqrt(0.5 / g0**3) / 0.2     # Birdsall & Langdon
    assert deck.box.length == pytest.approx(3 * 2 * math.pi / kfast, rel=1e-8)


def test_maxwellian_box_modes_give_landau_damping():
    vt = 0.01
    raw = {"title": "landau", "box": {"length": 2 * math.pi * vt / 0.4, "cells": 32},
           "species": [{"name": "e", "charge": -1.0, "density": 1.0, "theta": vt**2}],
           "output": {"recorded_modes": 2}}
    deck = load_deck(raw)
    d = theory.theory_for_deck(deck, model="maxwellian").to_dict()
    assert d["fastest"] is None and d["unstable_band"] is None
    # tabulated Landau root at k lambda_D = 0.4 (from memory, as above)
    landau = references.PUBLISHED_LANDAU_ROOTS[0.4].imag
    assert d["box_modes"][0]["growth"] == pytest.approx(landau, abs=1e-3)
    dj = theory.theory_for_deck(deck).to_dict()            # the deck's own model: juttner
    assert dj["model"] == "juttner"
    assert dj["box_modes"][0]["growth"] == 0.0
    assert dj["box_modes"][0]["maxwellian_growth"] == pytest.approx(landau, abs=1e-3)


def test_growth_time_units_module():
    # growth_time_ns = 1/(gamma omega_p) with omega_p = 5.64e4 n^1/2 rad/s (NRL Plasma Formulary)
    deck = load_deck(None)
    d = theory.theory_for_deck(deck).to_dict(density_cm3=1e12)
    wp = 5.64e4 * math.sqrt(1e12)
    assert d["fastest"]["growth_time_ns"] == pytest.approx(
        1e9 / (d["fastest"]["growth"] * wp), rel=1e-3)
    # and the rate is the cold symmetric-beam maximum omega_b/2 (Birdsall & Langdon 1991; from
    # memory), omega_b^2 = omega_ps^2/gamma0^3, for the default deck's beta = 0.1 pair
    assert d["fastest"]["growth"] == pytest.approx(0.5 * math.sqrt(0.5 * (1 - 0.01) ** 1.5), rel=1e-6)


# --------------------------------------------------------------------------------------------
# theory.json back to a Dispersion
# --------------------------------------------------------------------------------------------
DECKS = Path(__file__).resolve().parents[1] / "runs"


@pytest.mark.parametrize("name", ["pair-beams", "warm-pair-beams", "landau", "weak-beam"])
def test_dispersion_from_dict_round_trip(name):
    path = DECKS / f"{name}.toml"
    if not path.exists():
        pytest.skip(f"runs/{name}.toml not present")
    deck = load_deck(str(path))
    # through JSON text, as theory.json is written and read
    d = json.loads(json.dumps(theory.theory_for_deck(deck).to_dict(), allow_nan=False))
    disp = theory.Dispersion.from_dict(d)
    assert isinstance(disp, theory.Dispersion)
    assert json.loads(json.dumps(disp.to_dict(), allow_nan=False)) == d
    assert disp.time_end == (float(deck.time.end) if d["fastest"] else None)
    assert disp.k.shape == disp.growth.shape == disp.omega_r.shape == (len(d["curve"]["k"]),)
    assert all(isinstance(m, theory.BoxMode) for m in disp.box_modes)


def test_dispersion_typed_helpers():
    deck = load_deck(None)                 # DEFAULT_DECK: beams at beta = +-0.1, density 0.5 each
    disp = theory.Dispersion.from_dict(theory.theory_for_deck(deck).to_dict())
    g0 = 1 / math.sqrt(1 - 0.01)
    wb = math.sqrt(0.5 / g0**3)
    # gamma_max = omega_b/2 (Birdsall & Langdon 1991, sec. 5.10)
    assert disp.fastest_growth == pytest.approx(wb / 2, rel=1e-8)
    m1 = disp.box_mode(1)
    assert m1.mode == 1 and m1.k == pytest.approx(2 * math.pi / deck.box.length)   # k_m = 2 pi m/L
    # symmetric cold quartic (Birdsall & Langdon 1991; references.cold_symmetric_growth)
    for m in (1, 3, 8):
        exact = references.cold_symmetric_growth(2 * math.pi * m / deck.box.length, 0.1, wb)
        assert disp.growth_at_mode(m) == pytest.approx(exact, rel=1e-9)
    assert disp.box_mode(10_000) is None and disp.growth_at_mode(10_000) is None
    stable = theory.Dispersion.from_dict(theory.theory_for_deck(load_deck(
        {"title": "t", "box": {"length": 10.0, "cells": 32},
         "species": [{"name": "e", "charge": -1.0, "density": 1.0}]})).to_dict())
    assert stable.fastest_growth is None and stable.time_end is None


def test_dispersion_from_dict_refuses_an_error_block():
    with pytest.raises(ValueError, match="error"):
        theory.Dispersion.from_dict({"error": "ValueError: no species"})
    with pytest.raises(ValueError, match="missing"):
        theory.Dispersion.from_dict({"model": "cold"})


def test_box_modes_follow_output_recorded_modes():
    """The theory's box modes are the modes the run records (|E_k| for m = 1..recorded_modes),
    so growth fits always have a theory row beside them."""
    import streamsim
    from streamsim.theory import theory_for_deck
    deck = streamsim.load_deck(Path(__file__).parents[1] / "runs" / "warm-pair-beams.toml",
                              ["output.recorded_modes=5"])
    assert [b.mode for b in theory_for_deck(deck).box_modes] == [1, 2, 3, 4, 5]
