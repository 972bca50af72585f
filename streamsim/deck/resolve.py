"""Resolution: the derived values of a validated deck (box length, dt = "auto", theta from keV,
the output cadences, a band of seeded modes), and the advice that names a slipped input."""
from __future__ import annotations

import dataclasses
import functools
import math

from .errors import DeckError
from .schema import Box, Deck, Output, Perturbation, Species, Time

def _resolve_species(s: Species) -> Species:
    from .. import units
    theta = s.theta if s.theta is not None else units.theta_from_kev(s.temperature_kev, s.mass)
    kev = s.temperature_kev if s.temperature_kev is not None else units.kev_from_theta(theta, s.mass)
    return dataclasses.replace(s, theta=theta, temperature_kev=kev)


def _resolve_box(b: Box, species: tuple[Species, ...], density_cm3: float) -> Box:
    from .. import units
    length = b.length
    if length is None and b.length_cm is not None:
        length = units.length_from_cm(b.length_cm, density_cm3)
    elif length is None and b.fastest_wavelengths is not None:
        try:
            from ..theory import fastest_mode  # lazy: the deck asks the theory only when it must
            fast = fastest_mode(species)
        except Exception as ex:  # noqa: BLE001 - reported as a deck error naming the key
            raise DeckError("box.fastest_wavelengths", f"the linear theory could not find the "
                            f"fastest mode for these species ({ex})", b.fastest_wavelengths)
        if fast is None or not fast[1] > 0:
            raise DeckError("box.fastest_wavelengths", "these species are linearly stable, so there "
                            "is no fastest-growing mode; give box.length", b.fastest_wavelengths)
        length = b.fastest_wavelengths * 2.0 * math.pi / fast[0]
    elif length is None:
        length = 2.0 * math.pi
    length_cm = b.length_cm if b.length_cm is not None else units.length_cm(length, density_cm3)
    return dataclasses.replace(b, length=length, length_cm=length_cm)


def _resolve_time(t: Time, box: Box, species: tuple[Species, ...]) -> Time:
    if t.dt is not None:
        return t
    from ..health import auto_dt
    return dataclasses.replace(t, dt=auto_dt(box, species, t.end))


def _resolve_output(o: Output, t: Time) -> Output:
    dt, end = t.dt, t.end

    def cadence(given, default):
        if given is None:      # a default never undercuts the step
            return max(dt, default)
        if t.dt_auto:          # the user did not choose dt, so a cadence below it means "every step"
            return max(dt, given)
        return given

    checkpoint = o.checkpoint_interval
    return dataclasses.replace(
        o,
        # 0.1/omega_p: ten samples per e-fold at growth omega_p, ~60 per plasma period; more
        # often for short runs (common practice)
        diagnostics_interval=cadence(o.diagnostics_interval, min(0.1, end / 200.0)),
        fields_interval=cadence(o.fields_interval, end / 20.0),
        phase_space_interval=cadence(o.phase_space_interval, end / 8.0),
        # unset stays unset: the run then checkpoints on wall-clock time (checkpointer.py)
        checkpoint_interval=checkpoint if checkpoint in (None, 0) else cadence(checkpoint, 0.0))


@functools.lru_cache(maxsize=64)
def _bands(species: tuple[Species, ...]) -> tuple[tuple[float, float], ...]:
    from ..theory.roots import unstable_bands  # lazy: the deck asks the theory only when it must
    return tuple(unstable_bands(species))


def _resolve_perturbation(p: Perturbation, box: Box, species: tuple[Species, ...]) -> Perturbation:
    """``modes = "band"``: every box mode m = 1..cells/2 whose k_m = 2 pi m / L lies in an
    unstable band of the deck's linear theory; ``phases`` defaults to "random" for a band and
    "zero" for a list of modes."""
    phases = p.phases or ("random" if p.band else "zero")
    if not p.band or p.modes:
        return dataclasses.replace(p, phases=phases)
    try:
        bands = _bands(species)
    except Exception as ex:  # noqa: BLE001 - reported as a deck error naming the key
        raise DeckError("perturbation.modes", f"the linear theory could not find the unstable "
                        f"band ({ex})", "band")
    modes = tuple(m for m in range(1, box.cells // 2 + 1)
                  if any(lo <= 2 * math.pi * m / box.length <= hi for lo, hi in bands))
    if not modes:
        raise DeckError("perturbation.modes", "no box mode lies in an unstable band of the "
                        "linear theory (stable species, or a box shorter than the unstable "
                        "wavelengths)", "band")
    if p.amplitude * len(modes) >= 1:
        raise DeckError("perturbation.amplitude", f"amplitude x {len(modes)} band modes must be "
                        "< 1 (the density must stay positive)", p.amplitude)
    return dataclasses.replace(p, modes=modes, phases=phases)


# --------------------------------------------------------------------------------------------
# Advice that names a slipped input
# --------------------------------------------------------------------------------------------
#: a box that needs at least this many cells while the deck gives at least SLIP_FACTOR times
#: fewer is read as a slip of units, not a plan (common practice: no 1D run of this code is
#: planned at 10^5 cells by accident)
SLIP_CELLS = 5.0e4
SLIP_FACTOR = 30.0
#: kT above m c^2 (theta > 1) given in keV: 1000 "keV" is more often 1000 eV
SLIP_THETA = 1.0


def cells_needed(box: Box, species: tuple[Species, ...]) -> int:
    """The cells the box needs to resolve every species by the numerical-health rules: dx <=
    pi lambda_D for a warm species (finite-grid instability), omega_ps dx / |v_d| <= 1 for a
    cold drifting one (Birdsall & Langdon 1991, ch. 8); 0 when no species sets a scale."""
    from ..health import COLD_BEAM_WARN, DX_OVER_DEBYE_WARN, debye_length
    need = 0.0
    for s in species:
        lam = debye_length(s)
        if lam > 0:
            need = max(need, box.length / (DX_OVER_DEBYE_WARN * lam))
        elif s.drift_u != 0:
            need = max(need, box.length * math.sqrt(s.omega_p2) / abs(s.drift_beta)
                       / COLD_BEAM_WARN)
    return math.ceil(need)


def check_size_slip(deck: Deck, box: Box, species: tuple[Species, ...]) -> None:
    """One DeckError naming the density when a box given in cm needs ~10^5 cells or more (far
    more than the deck gives): a value in m^-3 typed as cm^-3 makes the box 10^3 times longer
    in c/omega_p. (A box given in c/omega_p does not depend on the density; the health rules
    give their own advice for it.)"""
    if deck.box.length_cm is None:
        return
    need = cells_needed(box, species)
    if need < SLIP_CELLS or need < SLIP_FACTOR * box.cells:
        return
    n = deck.units.density_cm3
    raise DeckError("units.density_cm3", f"with box.length_cm = {box.length_cm:g} this "
                    f"density makes the box {box.length:.3g} c/omega_p long, which needs "
                    f"box.cells >= {need} (the deck gives {box.cells}); if the density was "
                    f"meant in m^-3, write units.density_cm3 = {n * 1e-6:.3g} "
                    "(1 m^-3 = 1e-6 cm^-3)", n)


def _hot_in_kev(given: tuple[Species, ...], species: tuple[Species, ...]) -> Species | None:
    """The first species whose temperature was given in keV and is relativistically hot."""
    for g, s in zip(given, species):
        if g.temperature_kev is not None and g.theta is None and s.theta > SLIP_THETA:
            return s
    return None


def _naming_temperature(ex: DeckError, given, species) -> DeckError:
    """``ex`` (the theory found no band or no fastest mode) restated to name a temperature in
    keV that looks like eV, when there is one; else ``ex`` itself."""
    hot = _hot_in_kev(given, species)
    if hot is None:
        return ex
    return DeckError(f"species.{hot.name}.temperature_kev", f"theta = kT/(m c^2) = "
                     f"{hot.theta:.3g}, a relativistically hot plasma, and then {ex}; if the "
                     f"temperature was meant in eV, write temperature_kev = "
                     f"{hot.temperature_kev / 1000:g}", hot.temperature_kev)


def resolve(deck: Deck) -> Deck:
    """Fill in the derived values of a validated deck: species temperatures (theta <-> keV),
    the box length (from ``length_cm`` or the linear theory's fastest wavelength) and its cm
    form, ``dt = "auto"`` (numerical-health rules) and the output cadences left to their
    defaults (derived from ``time.end``, never below ``dt``). Resolving a resolved deck
    returns an equal deck. Raises :class:`DeckError`."""
    species = tuple(_resolve_species(s) for s in deck.species)
    try:
        box = _resolve_box(deck.box, species, deck.units.density_cm3)
    except DeckError as ex:
        raise _naming_temperature(ex, deck.species, species) from None
    if not deck.is_resolved:
        check_size_slip(deck, box, species)
    time = _resolve_time(deck.time, box, species)
    if time.dt > time.end * (1 + 1e-12):
        raise DeckError("time.dt", f"must be <= time.end = {time.end:g}", time.dt)
    output = _resolve_output(deck.output, time)
    drive = deck.drive
    if drive is not None and drive.current is None:
        from ..drive import convert_current
        form = "current_statA_cm2" if drive.current_statA_cm2 is not None else "current_A_m2"
        drive = dataclasses.replace(drive, current=convert_current(
            getattr(drive, form), form, deck.units.density_cm3))
    try:
        pert = _resolve_perturbation(deck.perturbation, box, species)
    except DeckError as ex:
        raise _naming_temperature(ex, deck.species, species) from None
    return dataclasses.replace(deck, species=species, box=box, time=time, output=output,
                               drive=drive, perturbation=pert)
