"""The run folder: its lock (one streamsim at a time) and the deck a finished run in it holds.

``FolderLock`` is an exclusive advisory lock on ``<folder>/.streamsim.lock``; ``comparable`` and
``first_difference`` compare two decks as plain data (the first differing key named), which both
the refusal to run over a finished run of another deck (:func:`check_existing_run`) and a resume
from a checkpoint use.
"""
from __future__ import annotations

import os
import socket
from pathlib import Path

from . import io
from .deck import Deck, DeckError, load_deck

__all__ = ["LOCK_FILE", "FolderLock", "FolderInUse", "DifferentDeck", "comparable",
           "first_difference", "check_existing_run"]

LOCK_FILE = ".streamsim.lock"


class DifferentDeck(DeckError):
    """The run folder holds a finished run of a different deck (``force=True`` overwrites it)."""


class FolderInUse(io.OutputError):
    """Another process is running into the same folder. Exit status 4 in the CLI."""


class FolderLock:
    """An exclusive advisory lock (fcntl.flock) on ``<folder>/.streamsim.lock`` holding the
    owner's pid and host; released when the run ends or its process dies."""

    def __init__(self, folder: Path):
        self.path = folder / LOCK_FILE
        self.fh = None

    def acquire(self) -> None:
        import fcntl
        try:
            self.path.parent.mkdir(parents=True, exist_ok=True)
            fh = open(self.path, "a+", encoding="utf-8")
        except OSError as ex:
            raise io.OutputError(f"cannot write {self.path}: {ex.strerror or ex}") from None
        try:
            fcntl.flock(fh, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            fh.seek(0)
            owner = fh.read().strip() or "another process"
            fh.close()
            raise FolderInUse(f"{self.path.parent} is in use by a running streamsim ({owner}); "
                              f"wait for it or choose another --out") from None
        fh.seek(0)
        fh.truncate()
        fh.write(f"pid {os.getpid()} on {socket.gethostname()}\n")
        fh.flush()
        self.fh = fh

    def release(self) -> None:
        if self.fh is not None:
            import fcntl
            fcntl.flock(self.fh, fcntl.LOCK_UN)
            self.fh.close()
            self.fh = None


def comparable(deck: Deck) -> dict:
    """The deck as plain data without what may change between a run and its resume."""
    d = deck.to_dict()
    d["output"] = {k: v for k, v in d["output"].items() if k not in ("folder", "threads")}
    return io.jsonable(d)


def first_difference(a, b, path="") -> str | None:
    """The first key path at which two plain-data decks differ, or None."""
    if isinstance(a, dict) and isinstance(b, dict):
        for k in sorted(set(a) | set(b)):
            found = first_difference(a.get(k), b.get(k), f"{path}.{k}" if path else k)
            if found:
                return found
        return None
    if isinstance(a, list) and isinstance(b, list) and len(a) == len(b):
        for i, (x, y) in enumerate(zip(a, b)):
            found = first_difference(x, y, f"{path}[{i}]")
            if found:
                return found
        return None
    return None if a == b else (path or "the deck")


def check_existing_run(folder: Path, deck: Deck) -> None:
    """Refuse to run over a finished run of a different deck (first differing key named)."""
    import json
    summ, old = folder / io.FILES["summary"], folder / io.FILES["deck"]
    if not (summ.is_file() and old.is_file()):
        return
    try:
        if json.loads(summ.read_text(encoding="utf-8")).get("status") != "completed":
            return
        theirs = comparable(load_deck(old))
    except (DeckError, OSError, ValueError):
        return      # an unreadable old deck protects nothing
    diff = first_difference(theirs, comparable(deck))
    if diff:
        raise DifferentDeck("", f"{folder} holds a finished run of a different deck ({diff} "
                                f"differs); choose another --out, or --force to overwrite it")
