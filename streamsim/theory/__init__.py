"""Linear theory: the 1D electrostatic dielectric function of a deck's species and its roots.

Everything is in the normalised units of streamsim (k in omega_p/c, omega in omega_p, u = gamma*beta,
velocities in c); physical units appear only in :meth:`Dispersion.to_dict`, through
:mod:`streamsim.units`.

Modules, by job:

``formulas``          Z function, Juttner distribution and moments, waterbag edges, Maxwellian
                      stand-in parameters (one formula per function).
``susceptibilities``  per-species chi terms (rational: cold/waterbag; Maxwell; Juttner
                      quadrature), eps, and the model a set of species implies.
``roots``             polynomial roots, Newton, continuation over k, bands, fastest mode, growth
                      curve.
``tabulated``         any distribution: the effective G(v), the closed-form eps of a tabulated
                      species (f linear in v between rows), the Penrose stability verdict of
                      every deck, damped table roots by a rational (AAA) continuation.
``dispersion``        the deck-level :class:`Dispersion` (and :class:`FastestMode`,
                      :class:`BoxMode`), :func:`theory_for_deck`, and theory.json
                      (:meth:`Dispersion.to_dict` / :meth:`Dispersion.from_dict`).

Every public name is re-exported here, so ``from streamsim import theory; theory.fastest_mode``
works as before.  The package imports no higher room (io, engine, analysis, cli).

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

from .formulas import (equivalent_waterbag_spread, juttner_distribution, juttner_normalisation,
                       juttner_u2_rest, maxwellian_parameters, one_plus_zeta_z,
                       plasma_dispersion_z, plasma_dispersion_z_prime, waterbag_edges)
from .susceptibilities import (MODELS, THETA_COLD, eps_cold, eps_juttner, eps_maxwellian,
                               eps_waterbag, model_for_species)
from .roots import (GROWTH_TOL, _auto_kmax, auto_kmax, cold_roots, fastest_mode, growth_curve,
                    juttner_growing_root, maxwellian_roots, unstable_bands, waterbag_roots)
from .dispersion import BoxMode, Dispersion, FastestMode, theory_for_deck
from .tabulated import StabilityVerdict, penrose_verdict, table_damped_root
from .eigenmodes import ModeBasis, charge_response, mode_basis, species_susceptibilities

__all__ = [
    "MODELS", "GROWTH_TOL", "THETA_COLD",
    "model_for_species", "plasma_dispersion_z", "plasma_dispersion_z_prime", "one_plus_zeta_z",
    "juttner_normalisation", "juttner_distribution", "juttner_u2_rest", "waterbag_edges",
    "equivalent_waterbag_spread", "maxwellian_parameters",
    "eps_cold", "cold_roots", "eps_waterbag", "waterbag_roots",
    "eps_maxwellian", "maxwellian_roots", "eps_juttner", "juttner_growing_root",
    "growth_curve", "fastest_mode", "unstable_bands", "auto_kmax", "theory_for_deck",
    "Dispersion", "FastestMode", "BoxMode",
    "species_susceptibilities", "charge_response", "mode_basis", "ModeBasis",
    "penrose_verdict", "StabilityVerdict", "table_damped_root",
]
