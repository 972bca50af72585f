"""Eigenmodes of the linear theory: each species' charge response at a root, and the basis of
normal modes in which a measured state (charge densities and their time derivatives at one k)
is decomposed.

At a root omega of eps(k, omega) = 1 + Sum_s chi_s = 0, Gauss's law i k E = Sum_s rho_s with the
linear response rho_s = -i k chi_s(k, omega) E gives each species' charge-density perturbation
per unit field,

    rho_s / E = -i k chi_s(k, omega),

and for a cold species chi_s = -omega_ps^2 / (gamma_s^3 (omega - k v_s)^2), so
rho_s / E = i k omega_ps^2 / (gamma_s^3 (omega - k v_s)^2) (e.g. Birdsall & Langdon, *Plasma
Physics via Computer Simulation* (1991), sec. 5.10; Krall & Trivelpiece (1973), ch. 8).

A cold (or waterbag) plasma of S species with distinct drifts is a linear system of 2S degrees of
freedom at each k (density and velocity per species, or equivalently rho_s and d rho_s/dt by
continuity), whose 2S normal modes are the 2S roots of the polynomial eps. The state vector

    X = (rho_1 .. rho_S, d rho_1/dt .. d rho_S/dt)

of a single mode e^{-i omega t} is v = (r, -i omega r), r_s = rho_s / E. The columns v_j of all
roots form a basis V; the amplitudes of the modes in any state are a = V^{-1} X (the left
eigenvectors are the rows of V^{-1}), so the growing mode's amplitude is separated from the other
2S - 1 modes at every time (normal-mode decomposition of a linear system, e.g. Strang,
*Linear Algebra and Its Applications* (1988), ch. 5).

Warm (kinetic) species have a continuum of non-growing (van Kampen) modes instead of 2S - 1
discrete ones; :func:`mode_basis` then completes the kinetic growing root with the non-growing
roots of the waterbag stand-in of equal rest-frame <u'^2> (the theory's ``waterbag`` model). The
projection is then approximate: it removes the fluid-like parts of the non-growing spectrum.
"""
from __future__ import annotations

import numpy as np

from .roots import cold_roots, waterbag_roots
from .susceptibilities import MODELS, _species_list, _terms

__all__ = ["species_susceptibilities", "charge_response", "mode_basis", "ModeBasis"]


def species_susceptibilities(k: float, omega: complex, species, model: str = "cold") -> np.ndarray:
    """chi_s(k, omega) of every species (deck order) under a theory model (see
    :mod:`streamsim.theory.susceptibilities`); chi_s = -omega_ps^2/(gamma_s^3 (omega - k v_s)^2)
    for a cold species."""
    if model not in MODELS:
        raise ValueError(f"unknown model {model!r}; choose one of {', '.join(MODELS)}")
    out = []
    for s in _species_list(species):
        (term,) = _terms([s], model)
        out.append(complex(term.chi(float(k), complex(omega))[0]))
    return np.array(out, complex)


def charge_response(k: float, omega: complex, species, model: str = "cold") -> np.ndarray:
    """rho_s / E = -i k chi_s(k, omega) for every species at a root omega (module docstring):
    the eigenvector of the root in the space of species charge-density perturbations."""
    return -1j * float(k) * species_susceptibilities(k, omega, species, model)


class ModeBasis:
    """The normal-mode basis at one k (see the module docstring).

    ``omegas[0]`` is the growing root; ``V`` has the columns (r_j, -i omega_j r_j), r_j the
    charge response normalised to unit field, so that the first amplitude of
    :meth:`amplitudes` is the growing mode's field amplitude E (in the units of the rho_s).
    """

    def __init__(self, k: float, omegas: np.ndarray, responses: np.ndarray):
        self.k = float(k)
        self.omegas = np.asarray(omegas, complex)
        r = np.asarray(responses, complex)              # (modes, S)
        self.V = np.concatenate([r.T, (-1j * self.omegas[None, :]) * r.T], axis=0)
        self.condition = float(np.linalg.cond(self.V))
        self.left = np.linalg.inv(self.V)

    def amplitudes(self, rho: np.ndarray, drho_dt: np.ndarray) -> np.ndarray:
        """Mode amplitudes a_j(t) (columns) from rho_s(t) and d rho_s/dt (arrays (n, S))."""
        X = np.concatenate([np.asarray(rho, complex), np.asarray(drho_dt, complex)], axis=1)
        return X @ self.left.T

    def growing(self, rho: np.ndarray, drho_dt: np.ndarray) -> np.ndarray:
        """The growing mode's field amplitude E_g(t) = (V^{-1} X)_0."""
        X = np.concatenate([np.asarray(rho, complex), np.asarray(drho_dt, complex)], axis=1)
        return X @ self.left[0]


def mode_basis(k: float, omega_growing: complex, species, model: str) -> ModeBasis | None:
    """The basis of :class:`ModeBasis` at k for the growing root ``omega_growing`` of ``model``.

    The other 2S - 1 roots are the polynomial roots of the cold or waterbag model (for the kinetic
    models, the waterbag stand-in), without the one nearest to the growing root. None when the
    species give fewer than 2S distinct roots (two species with the same drift and spread: their
    perturbations are then not separable by their dynamics) or the basis is singular.
    """
    species = _species_list(species)
    n = 2 * len(species)
    rational = "cold" if model == "cold" else "waterbag"
    roots = (cold_roots if rational == "cold" else waterbag_roots)(float(k), species)[0]
    roots = roots[np.isfinite(roots)]
    if roots.size != n:
        return None
    j = int(np.argmin(np.abs(roots - omega_growing)))
    others = np.delete(roots, j)
    grow = omega_growing if model not in ("cold", "waterbag") else roots[j]
    omegas = np.concatenate([[grow], others])
    resp = [charge_response(k, grow, species, model)]
    resp += [charge_response(k, w, species, rational) for w in others]
    try:
        basis = ModeBasis(k, omegas, np.array(resp))
    except np.linalg.LinAlgError:
        return None
    if not np.isfinite(basis.condition) or basis.condition > 1e10:
        return None
    return basis
