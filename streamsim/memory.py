"""How much memory a run will hold, estimated from its deck before anything is allocated.

:func:`estimate` sums what the run's method holds for its own state and what each of its
recording handlers reports it will preallocate (``Handler.nbytes(deck)``, from the same
``layout`` the handler allocates), grouped by the handler's ``memory_item``. For a PIC run:

* ``particles``: x and u of every macro-particle (the method's state), plus the copy of x kept
  for the peak snapshot;
* ``time_series``: the series recorder's arrays (energies, momenta, the complex amplitudes of
  the recorded modes and the complex density modes of every species, max/rms delta n/n);
* ``field_snapshots``, ``phase_space``: the field snapshots and the phase-space subsample;
* ``emission_snapshots``: the emission records (|F_s(k)|^2 and the fine density);
* ``drive``: a driven run's drive series and gamma histograms.

A continuum run has ``phase_space_grid`` (f and its work copy) and its handlers' items. Record
counts are the handlers' own (:func:`streamsim.diagnostics.record_steps`).

:func:`check` refuses a deck whose estimate exceeds the available memory with a
:class:`MemoryRefusal`, one line naming the largest item and its fix.

The method table sits below this room; :func:`estimate` reaches it by a lazy import (the deck's
method picks the state and the handlers).
"""
from __future__ import annotations

import os

from .deck import Deck, DeckError, show_value

__all__ = ["MemoryRefusal", "estimate", "tally", "check", "memory_available", "pic_state_bytes",
           "pic_refusal"]

F8, C16 = 8, 16
GIB = float(1 << 30)


class MemoryRefusal(DeckError):
    """The run would need more memory than the machine has; ``str(err)`` is the one line."""


def _particles(deck: Deck) -> list[int]:
    return [s.particles_per_cell * deck.box.cells for s in deck.species]


def pic_state_bytes(deck: Deck) -> dict[str, int]:
    """Bytes of a PIC run's own state: x and u of every macro-particle."""
    return {"particles": sum(_particles(deck)) * 2 * F8}


def tally(deck: Deck, state: dict[str, int], handler_classes) -> dict[str, int]:
    """The estimate: the method's ``state`` bytes plus every handler's ``nbytes(deck)`` under
    its ``memory_item``, and their ``total``."""
    out = dict(state)
    for cls in handler_classes:
        out[cls.memory_item] = out.get(cls.memory_item, 0) + cls.nbytes(deck)
    out["total"] = sum(out.values())
    return out


def estimate(deck: Deck) -> dict[str, int]:
    """Bytes a run of ``deck`` (resolved) holds, by item, and their ``total`` (module
    docstring)."""
    from .methods import METHODS
    return METHODS[deck.method].memory(deck)


def memory_available() -> int | None:
    """Memory available to a new process: MemAvailable of /proc/meminfo (Linux), else the
    free physical pages from os.sysconf; None when neither is known."""
    try:
        with open("/proc/meminfo", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except (OSError, ValueError, IndexError):
        pass
    try:
        return int(os.sysconf("SC_AVPHYS_PAGES")) * int(os.sysconf("SC_PAGE_SIZE"))
    except (ValueError, OSError, AttributeError):
        return None


def _gib(n: float) -> str:
    g = n / GIB
    return f"{g:.0f}" if g >= 10 else f"{g:.2g}"


def pic_refusal(deck: Deck, item: str, need: int, avail: int, handler_classes=()) \
        -> MemoryRefusal:
    """The one-line refusal naming ``item`` (the largest of the estimate) and its fix."""
    o, end = deck.output, deck.time.end
    have = f"(available {_gib(avail)} GiB)"
    if item == "particles":
        s = max(deck.species, key=lambda s: s.particles_per_cell)
        n = sum(_particles(deck))
        return MemoryRefusal(
            f"species.{s.name}.particles_per_cell",
            f"the particles need {_gib(need)} GiB for {n:.3g} macro-particles on "
            f"box.cells = {deck.box.cells} {have}: lower particles_per_cell or box.cells",
            s.particles_per_cell)
    cls = next(c for c in handler_classes if c.memory_item == item)
    cadence, what = cls.cadence_key, cls.what
    extra = ", lower output.phase_space_particles" if cadence == "phase_space_interval" else ""
    interval = getattr(o, cadence)
    return MemoryRefusal(
        "time.end", f"{what} need {_gib(need)} GiB at output.{cadence} = {show_value(interval)} "
        f"{have}: raise output.{cadence}{extra} or shorten time.end", end)


def check(deck: Deck, available_bytes: int | None = None) -> dict[str, int]:
    """The :func:`estimate` of ``deck``; raises :class:`MemoryRefusal` when its total exceeds
    ``available_bytes`` (default: :func:`memory_available`; unknown memory is not checked)."""
    from .methods import METHODS
    method = METHODS[deck.method]
    est = method.memory(deck)
    avail = memory_available() if available_bytes is None else available_bytes
    if avail is not None and est["total"] > avail:
        item = max((k for k in est if k != "total"), key=est.get)
        raise method.memory_refusal(deck, item, est, avail)
    return est
