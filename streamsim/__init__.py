"""streamsim: relativistic 1D electrostatic PIC for counter-streaming electron-positron plasma.

Public API (thin over the rooms of the package)::

    deck = streamsim.load_deck("runs/pair-beams.toml")      # or a dict, or None for the default
    result = streamsim.run(deck)                             # -> Result with named fields
    disp = streamsim.linear_theory(deck)                     # linear theory for the same deck
"""
from __future__ import annotations

from ._version import __version__  # noqa: E402

from .deck import Deck, DeckError, load_deck  # noqa: E402


def run(deck, **kwargs):
    """Run a deck (a Deck, a path, a dict or None for the default); see :func:`streamsim.pipeline.run`."""
    from .pipeline import run as _run
    return _run(deck, **kwargs)


def linear_theory(deck, **kwargs):
    """Linear theory for a deck's species and box; see :func:`streamsim.theory.theory_for_deck`."""
    from .theory import theory_for_deck
    return theory_for_deck(load_deck(deck), **kwargs)


def analyze(source, **kwargs):
    """Analyse a run folder or a Result; see :func:`streamsim.analysis.analyze`."""
    from .analysis import analyze as _analyze
    return _analyze(source, **kwargs)


__all__ = ["Deck", "DeckError", "load_deck", "run", "linear_theory", "analyze", "__version__"]
