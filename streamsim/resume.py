"""Continuing a run from its checkpoint: to its own end, or to a later one (an extension).

A resume may change one key of the run's deck, ``time.end``, and only to a later end. An
extension keeps what the run already had: its output cadences and its step. The deck.toml of the
run folder writes them all, so ``streamsim run --resume RUN --set time.end=T`` changes nothing
else; a deck that left them to their defaults (derived from ``time.end``, and ``dt = "auto"``
from the end too) gets the run's own values back, with a line saying so. A cadence or any other
key given a new value is refused by the resume, naming the key. The extended run records at the
same steps a straight run to the new end with the same cadences records at, so its time series
are the same, bit for bit at the same thread count.
"""
from __future__ import annotations

import copy
import dataclasses
from pathlib import Path

from . import io
from .deck import Deck, DeckError, resolve

#: the output cadences an extension keeps (each derived from ``time.end`` when not given)
CADENCES = ("diagnostics_interval", "fields_interval", "phase_space_interval",
            "checkpoint_interval")


def checkpoint_deck(folder) -> dict | None:
    """The deck (plain data, as the checkpoint compares it) of the run whose checkpoint is in
    ``folder``, or None when there is no checkpoint or it holds no deck."""
    path = Path(folder) / io.FILES["checkpoint"]
    if not path.is_file():
        return None
    return io.read_checkpoint_meta(path)["meta"].get("deck")


def extended_deck(deck: Deck, theirs: dict | None) -> tuple[Deck, list[str]]:
    """``deck`` as the resume of the run whose deck is ``theirs`` runs it, and the lines that
    say what it kept of the run.

    The same end: ``deck`` unchanged. A later end: the run's cadences replace those ``deck``
    derived from its own end (a cadence the deck gives stays, and differs only if the user
    changed it, which the resume then refuses), and the run's step replaces a ``dt = "auto"``.
    An earlier end is a :class:`DeckError` naming ``time.end``."""
    if theirs is None:
        return deck, []
    end0 = float(theirs["time"]["end"])
    if deck.time.end == end0:
        return deck, []
    if deck.time.end < end0:
        raise DeckError("time.end", f"a resume continues the run to its end ({end0:g}) or a "
                        f"later one", deck.time.end)
    derived = resolve(dataclasses.replace(deck, output=dataclasses.replace(
        deck.output, **{k: None for k in CADENCES}))).output
    kept = {}
    for key in CADENCES:
        mine, run = getattr(deck.output, key), theirs["output"].get(key)  # unset: not written
        if mine != run and mine == getattr(derived, key):
            kept[key] = run
    time = deck.time
    if time.dt_auto and time.dt != theirs["time"]["dt"]:
        time = dataclasses.replace(time, dt=float(theirs["time"]["dt"]))
    notes = []
    if kept or time is not deck.time:
        shown = [f"output.{k} = {v:g}" for k, v in kept.items()]
        if time is not deck.time:
            shown.append(f"time.dt = {time.dt:g}")
        notes.append(f"extending the run from time.end = {end0:g} to {deck.time.end:g} with its "
                     f"own {', '.join(shown)} (the deck derived other values from the new end)")
        deck = dataclasses.replace(deck, time=time,
                                   output=dataclasses.replace(deck.output, **kept))
    if abs(deck.time.steps * deck.time.dt - deck.time.end) > 1e-9 * deck.time.end:
        notes.append(f"time.end = {deck.time.end:g} is not a whole number of steps "
                     f"dt = {deck.time.dt:g}: the run ends at t = "
                     f"{deck.time.steps * deck.time.dt:.10g}")
    return deck, notes


def with_later_end(theirs: dict, end: float) -> dict:
    """The run's deck (plain data) with ``time.end`` moved to ``end`` when that is later: the
    one difference a resume accepts."""
    if end <= float(theirs["time"]["end"]):
        return theirs
    out = copy.deepcopy(theirs)
    out["time"]["end"] = end
    return out
