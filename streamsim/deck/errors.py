"""One error family for user input, one "did you mean", one value formatter (decks and scan
files alike)."""
from __future__ import annotations

import dataclasses
import difflib
import math
from typing import Any

_MISSING = dataclasses.MISSING


def show_value(value: Any) -> str:
    """A value as it appears in a one-line message: short, TOML-like numbers (``1e9``, not
    ``1000000000.0``), strings quoted, long things cut at 60 characters."""
    if isinstance(value, float) and math.isfinite(value) and value != 0.0:
        text = repr(value)
        if "e" not in text and (abs(value) >= 1e6 or abs(value) < 1e-4):
            for digits in range(17):
                text = f"{value:.{digits}e}"
                if float(text) == value:
                    break
            mantissa, exponent = text.split("e")
            text = f"{mantissa}e{int(exponent)}"
        return text
    if isinstance(value, str):
        return repr(value) if len(value) < 60 else repr(value[:57] + "...")
    if isinstance(value, dict):
        return "{...}"
    text = repr(value)
    return text if len(text) < 60 else text[:57] + "..."


def _closest(word: str, options) -> str | None:
    close = difflib.get_close_matches(word, sorted(options), n=1, cutoff=0.6)
    return close[0] if close else None


def did_you_mean(word: str, options) -> str:
    """The message for an unknown key ``word`` among ``options``."""
    close = _closest(word, options)
    return (f"unknown key; did you mean '{close}'?" if close
            else "unknown key; known keys: " + ", ".join(sorted(options)))


class InputError(ValueError):
    """A problem with user input tied to one place (a key, a file, an axis).

    ``str(err)`` is the one line the CLI prints: ``where = value: message`` when the value is
    given, else ``where: message``.
    """

    def __init__(self, where: str, message: str, value: Any = _MISSING):
        self.where = where
        self.value = value
        self.message = message
        if value is not _MISSING:
            text = f"{where} = {show_value(value)}: {message}" if where else \
                f"{show_value(value)}: {message}"
        else:
            text = f"{where}: {message}" if where else message
        super().__init__(text)

    @property
    def key(self) -> str:
        return self.where


class DeckError(InputError):
    """A deck problem, tied to one key. ``str(err)`` is the one line the CLI prints."""
