"""Physical units against the NRL Plasma Formulary (handbook values)."""
import math

import pytest

from streamsim import units


def test_omega_pe_matches_nrl_formulary():
    """NRL Plasma Formulary: omega_pe = 5.64e4 n_e^(1/2) rad/s (n_e in cm^-3)."""
    assert units.omega_p_rad_s(1e10) == pytest.approx(5.64e9, rel=1e-3)
    assert units.omega_p_rad_s(4e12) == pytest.approx(5.64e4 * math.sqrt(4e12), rel=1e-3)


def test_skin_depth_matches_nrl_formulary():
    """NRL Plasma Formulary: electron inertial length c/omega_pe = 5.31e5 n_e^(-1/2) cm."""
    assert units.skin_depth_cm(1e10) == pytest.approx(5.31e5 / 1e5, rel=1e-3)


def test_cgs_constants_from_codata():
    """CODATA (scipy.constants) in CGS: e = 4.803e-10 statC, m_e = 9.109e-28 g, c = 2.998e10 cm/s
    (NRL Plasma Formulary, physical constants)."""
    assert units.E_STATC == pytest.approx(4.8032e-10, rel=1e-4)
    assert units.M_E_G == pytest.approx(9.1094e-28, rel=1e-4)
    assert units.C_CM_S == pytest.approx(2.9979e10, rel=1e-4)


def test_time_scales_as_inverse_sqrt_density():
    """omega_p ∝ n^(1/2) (definition): a 4x denser plasma has half the time unit."""
    assert units.time_ns(1.0, 4e10) == pytest.approx(units.time_ns(1.0, 1e10) / 2, rel=1e-12)
    assert units.plasma_period_ns(1e10) == pytest.approx(2 * math.pi / 5.64e9 * 1e9, rel=1e-3)


# --------------------------------------------------------------------------------------------
# physical-unit deck keys: box.length_cm and species.temperature_kev
# --------------------------------------------------------------------------------------------
import scipy.constants as sc  # noqa: E402

from streamsim.deck import load_deck  # noqa: E402

N_REF = 4.0e12          # cm^-3, invented test plasma
T_KEV = 2.0             # keV
L_CM = 3.0              # cm


def _theta_si(t_kev, mass_ratio=1.0):
    """theta = kT/(m c^2) from CODATA (scipy.constants) in SI: kT = T_keV * 1e3 * e joules."""
    return t_kev * 1e3 * sc.e / (mass_ratio * sc.m_e * sc.c**2)


def _length_si(l_cm, n_cm3):
    """L / (c/omega_p) with omega_p = sqrt(n e^2 / (eps0 m_e)) (SI form, n in m^-3)."""
    wp = math.sqrt(n_cm3 * 1e6 * sc.e**2 / (sc.epsilon_0 * sc.m_e))
    return l_cm * 1e-2 * wp / sc.c


def _physical_raw(**species_extra):
    species = []
    for name, q, b in (("electrons", -1.0, 0.2), ("positrons", 1.0, -0.2)):
        s = {"name": name, "charge": q, "density": 0.5, "drift_beta": b,
             "distribution": "juttner", "particles_per_cell": 16, "temperature_kev": T_KEV}
        s.update(species_extra)
        species.append(s)
    return {"title": "physical keys", "units": {"density_cm3": N_REF},
            "box": {"length_cm": L_CM, "cells": 64}, "time": {"dt": 0.05, "end": 10.0},
            "species": species}


def test_theta_from_kev_against_codata():
    """theta = kT/(m c^2); m_e c^2 = 510.999 keV (CODATA via scipy.constants, SI route)."""
    # (1e-10: the tabulated m_e c^2 = 0.51099895069 MeV carries 11 digits)
    assert units.theta_from_kev(T_KEV) == pytest.approx(_theta_si(T_KEV), rel=1e-10, abs=0)
    mp = sc.m_p / sc.m_e
    assert units.theta_from_kev(T_KEV, mp) == pytest.approx(_theta_si(T_KEV, mp), rel=1e-10, abs=0)
    assert units.kev_from_theta(units.theta_from_kev(T_KEV, mp), mp) == pytest.approx(T_KEV, rel=1e-14)
    assert units.MC2_KEV == pytest.approx(511.0, rel=1e-3)   # NRL Plasma Formulary: 0.511 MeV


def test_deck_with_kev_and_cm_resolves_to_the_hand_values():
    deck = load_deck(_physical_raw())
    e = deck.species_named("electrons")
    # NRL Plasma Formulary: lambda_D = 743 (T_eV/n)^(1/2) cm and omega_pe = 5.64e4 n^(1/2) rad/s;
    # in c/omega_p units the electron Debye length at n_ref is v_th/omega_p = sqrt(theta), so
    # theta = (lambda_D omega_pe / c)^2 (3-digit handbook constants: 0.3 % tolerance)
    lam_cm = 743.0 * math.sqrt(T_KEV * 1e3 / N_REF)
    wp_nrl = 5.64e4 * math.sqrt(N_REF)
    c_cm = sc.c * 100.0
    assert e.theta == pytest.approx((lam_cm * wp_nrl / c_cm) ** 2, rel=3e-3)
    assert e.theta == pytest.approx(_theta_si(T_KEV), rel=1e-10, abs=0)   # 11-digit m_e c^2
    # length: L omega_pe / c with the NRL omega_pe (0.2 %), and exactly with the SI formula
    assert deck.box.length == pytest.approx(L_CM * wp_nrl / c_cm, rel=2e-3)
    # (to 1e-9: the Gaussian conversion 1 C = 10 c statC assumes mu_0 = 4 pi 1e-7 exactly, which
    # the 2019 SI leaves measured, off by ~1e-10 relative; CODATA via scipy.constants.mu_0)
    assert abs(sc.mu_0 / (4e-7 * math.pi) - 1) < 1e-9
    assert deck.box.length == pytest.approx(_length_si(L_CM, N_REF), rel=1e-9, abs=0)
    # both forms are recorded
    assert deck.box.length_cm == L_CM and e.temperature_kev == T_KEV


def test_physical_deck_equals_its_normalised_twin():
    phys = load_deck(_physical_raw())
    raw = _physical_raw()
    raw["box"] = {"length": _length_si(L_CM, N_REF), "cells": 64}
    for s in raw["species"]:
        s.pop("temperature_kev")
        s["theta"] = _theta_si(T_KEV)
    twin = load_deck(raw)

    def flat(d, prefix=""):
        out = {}
        items = enumerate(d) if isinstance(d, list) else d.items()
        for k, v in items:
            if isinstance(v, (dict, list)) and not (isinstance(v, list) and v and
                                                     not isinstance(v[0], dict)):
                out.update(flat(v, f"{prefix}{k}."))
            else:
                out[f"{prefix}{k}"] = v
        return out

    a, b = flat(phys.to_dict()), flat(twin.to_dict())
    assert a.keys() == b.keys()
    for k in a:
        if isinstance(a[k], float):
            assert a[k] == pytest.approx(b[k], rel=1e-9, abs=0), k   # round-off, mu_0 note
        else:
            assert a[k] == b[k], k
    assert twin.box.length_cm == pytest.approx(L_CM, rel=1e-9)   # mu_0 note above
    assert twin.species[0].temperature_kev == pytest.approx(T_KEV, rel=1e-10)  # 11-digit m_e c^2
    # the resolved deck reloads to the same run
    assert load_deck(phys.to_dict()) == phys


def test_keV_scales_with_the_species_mass():
    """theta = kT/(m c^2): a species of mass 4 m_e at the same kT has a quarter of the theta."""
    light = load_deck(_physical_raw()).species[0]
    heavy = load_deck(_physical_raw(mass=4.0)).species[0]
    assert heavy.theta == pytest.approx(light.theta / 4.0, rel=1e-14, abs=0)


def test_length_cm_follows_the_reference_density():
    """omega_p ∝ n^(1/2) (definition): at 4x the density the same cm are twice the c/omega_p."""
    a = load_deck(_physical_raw())
    b = load_deck(_physical_raw(), [f"units.density_cm3={4 * N_REF}"])
    assert b.box.length == pytest.approx(2 * a.box.length, rel=1e-12)
