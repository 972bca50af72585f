"""How much memory a run will hold, estimated from its deck before anything is allocated.

:func:`estimate` counts the arrays a run keeps for its whole length (float64 = 8 bytes, complex128
= 16 bytes):

* ``particles``: x and u of every macro-particle, plus the copy of x kept for the peak snapshot;
* ``time_series``: per diagnostics record t, the kinetic energy and momentum of each species, the
  field energy, the complex amplitudes of the recorded modes and max/rms delta n/n of each species
  and of the pair total;
* ``field_snapshots``: per fields record one row per species density plus the field, each over
  the cells;
* ``phase_space``: per phase-space record the (x, u) subsample of every species.

Record counts follow the recorder: ``steps // stride + 2`` (step 0, the last step, and one to
spare), with ``stride = max(1, round(interval / dt))``.

:func:`check` refuses a deck whose estimate exceeds the available memory with a
:class:`MemoryRefusal`, one line naming the largest item and its fix.
"""
from __future__ import annotations

import os

from .deck import Deck, DeckError, show_value

__all__ = ["MemoryRefusal", "estimate", "check", "memory_available"]

F8, C16 = 8, 16
GIB = float(1 << 30)


class MemoryRefusal(DeckError):
    """The run would need more memory than the machine has; ``str(err)`` is the one line."""


def _stride(interval: float, dt: float) -> int:
    return max(1, int(round(interval / dt)))


def _records(deck: Deck, interval: float) -> int:
    return deck.time.steps // _stride(interval, deck.time.dt) + 2


def _particles(deck: Deck) -> list[int]:
    return [s.particles_per_cell * deck.box.cells for s in deck.species]


def estimate(deck: Deck) -> dict[str, int]:
    """Bytes a run of ``deck`` (resolved) holds: ``particles``, ``time_series``,
    ``field_snapshots``, ``phase_space`` and their ``total``."""
    S, N, M = len(deck.species), deck.box.cells, deck.output.modes
    o = deck.output
    counts = _particles(deck)
    particles = sum(counts) * (2 * F8 + F8)           # x, u + peak snapshot of x
    per_record = F8 * (1 + S + 1 + S + 2 * (S + 1)) + C16 * M
    series = _records(deck, o.diagnostics_interval) * per_record
    fields = _records(deck, o.fields_interval) * (F8 * (S + 1) * N + F8)
    sub = sum(min(o.phase_space_particles, n) for n in counts)
    phase = _records(deck, o.phase_space_interval) * (2 * F8 * sub + F8)
    out = {"particles": particles, "time_series": series, "field_snapshots": fields,
           "phase_space": phase, "emission_snapshots": _emission_bytes(deck)}
    out["total"] = sum(out.values())
    return out


def _emission_bytes(deck: Deck) -> int:
    from .emission_snapshots import bytes_needed   # the emission handler's own count
    return bytes_needed(deck)


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


def _refusal(deck: Deck, item: str, need: int, avail: int) -> MemoryRefusal:
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
    cadence, what, extra = {
        "time_series": ("diagnostics_interval", "the time series", ""),
        "field_snapshots": ("fields_interval", "the field snapshots", ""),
        "phase_space": ("phase_space_interval", "the phase-space samples",
                        ", lower output.phase_space_particles"),
    }[item]
    interval = getattr(o, cadence)
    return MemoryRefusal(
        "time.end", f"{what} need {_gib(need)} GiB at output.{cadence} = {show_value(interval)} "
        f"{have}: raise output.{cadence}{extra} or shorten time.end", end)


def check(deck: Deck, available_bytes: int | None = None) -> dict[str, int]:
    """The :func:`estimate` of ``deck``; raises :class:`MemoryRefusal` when its total exceeds
    ``available_bytes`` (default: :func:`memory_available`; unknown memory is not checked)."""
    est = estimate(deck)
    avail = memory_available() if available_bytes is None else available_bytes
    if avail is not None and est["total"] > avail:
        item = max((k for k in est if k != "total"), key=est.get)
        raise _refusal(deck, item, est[item], avail)
    return est
