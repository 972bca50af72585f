"""Reading decks: TOML files with one-line syntax errors, the built-in default deck, and the one
public entry :func:`load_deck` (read, override, validate, resolve)."""
from __future__ import annotations

import copy
import importlib.resources
import tomllib
from pathlib import Path

from .errors import DeckError
from .overrides import apply_overrides
from .resolve import resolve
from .schema import RENAMED_KEYS, Deck
from .validate import validate

def read_toml_file(path: str | Path, kind: str = "deck", error=DeckError) -> tuple[dict, str]:
    """(data, text) of a TOML file; any failure becomes ``error(path, message)``, a syntax error
    with its line and column. ``kind`` names the file in messages ("deck", "scan file")."""
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise error(str(path), f"no such {kind}") from None
    except IsADirectoryError:
        raise error(str(path), f"is a folder, not a {kind}") from None
    except (OSError, UnicodeDecodeError) as ex:
        raise error(str(path), f"cannot read the {kind} ({ex.__class__.__name__}: {ex})") from None
    try:
        return tomllib.loads(text), text
    except tomllib.TOMLDecodeError as ex:
        line = getattr(ex, "lineno", None)
        col = getattr(ex, "colno", None)
        msg = getattr(ex, "msg", str(ex))
        where = f"line {line}, column {col}" if line else "unknown position"
        raise error(str(path), f"not valid TOML at {where}: {msg}") from None


#: the first words of a deck streamsim wrote itself (``Deck.to_toml``, deck.toml of a run)
WRITTEN_MARK = "# Resolved deck, written by streamsim"


def upgrade_written(raw: dict) -> dict:
    """A deck that streamsim wrote under an earlier version, with its renamed keys moved to
    their new names (a run folder of an earlier version still reads; a deck a person wrote
    gets the one-line "renamed; use ..." error instead)."""
    raw = copy.deepcopy(raw)
    for old, new in RENAMED_KEYS.items():
        (sec, key), (new_sec, new_key) = old.split("."), new.split(".")
        table = raw.get(sec)
        if isinstance(table, dict) and key in table and sec == new_sec:
            table.setdefault(new_key, table.pop(key))
    return raw


def read_toml(path: str | Path) -> dict:
    """Read a deck file; a syntax error becomes a DeckError with line and column. A deck
    streamsim wrote itself under an earlier version is upgraded (:func:`upgrade_written`)."""
    raw, text = read_toml_file(path, "deck file")
    return upgrade_written(raw) if text.startswith(WRITTEN_MARK) else raw


def load_deck(source: str | Path | dict | Deck | None = None, overrides: list[str] | None = None) -> Deck:
    """Read, override, validate and resolve a deck.

    ``source`` is a path to a TOML file, an already-parsed dict, a Deck (returned resolved,
    unless there are overrides) or None for the built-in default deck. Raises
    :class:`DeckError`.
    """
    if isinstance(source, Deck):
        if not overrides:
            return source if source.is_resolved else resolve(source)
        raw = resolve(source).to_dict()
    elif source is None:
        raw = tomllib.loads(DEFAULT_DECK)
    elif isinstance(source, dict):
        raw = copy.deepcopy(source)
    else:
        raw = read_toml(source)
    if overrides:
        raw = apply_overrides(raw, list(overrides))
    if isinstance(source, (str, Path)):         # table paths are relative to the deck file
        from ..distribution_table import anchor_tables
        anchor_tables(raw, Path(source).resolve().parent)
    return resolve(validate(raw))


def _read_default_deck() -> str:
    return (importlib.resources.files("streamsim").joinpath("data").joinpath("default.toml")
            .read_text(encoding="utf-8"))


#: The built-in default deck (`streamsim run` with no DECK), the text of the package data file
#: streamsim/data/default.toml. Also shipped as runs/pair-beams.toml.
DEFAULT_DECK = _read_default_deck()
