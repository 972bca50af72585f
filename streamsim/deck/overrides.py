"""``--set KEY=VALUE`` overrides on raw deck data (decks, scan files, every command)."""
from __future__ import annotations

import copy
import re
import tomllib
from typing import Any

from .errors import DeckError, did_you_mean
from .schema import SECTIONS, group_of

def parse_override(text: str) -> tuple[list[str], Any]:
    """``"species.electrons.theta=1e-3"`` -> (["species", "electrons", "theta"], 0.001).

    The value is parsed as a TOML literal and nothing else (strings need quotes); nothing is
    ever evaluated.
    """
    if "=" not in text:
        raise DeckError(text, "an override is written key=value, e.g. species.electrons.theta=1e-3")
    key, _, literal = text.partition("=")
    key = key.strip()
    if not re.fullmatch(r"[A-Za-z_][A-Za-z0-9_\-]*(\.(\*|[A-Za-z0-9_\-]+))*", key):
        raise DeckError(key or text, "not a deck key (write section.key=value)")
    try:
        value = tomllib.loads("v = " + literal.strip())["v"]
    except tomllib.TOMLDecodeError:
        raise DeckError(key, "the value must be a TOML literal: a number, true/false, a list, or a "
                        "string in quotes (e.g. box.shape='\"tsc\"')", literal.strip()) from None
    return key.split("."), value


def apply_overrides(raw: dict, overrides: list[str]) -> dict:
    """Apply ``--set`` overrides to raw deck data; species are addressed by name, or ``*`` for
    every species. Setting one key of an exclusive group (``box.length``/``length_cm``/
    ``fastest_wavelengths``, ``drift_beta``/``drift_u``, ``theta``/``temperature_kev``) drops
    the others."""
    raw = copy.deepcopy(raw)
    for text in overrides:
        parts, value = parse_override(text)
        key = ".".join(parts)
        if parts[0] == "species":
            if len(parts) != 3:
                raise DeckError(key, "address a species key as species.<name>.<key> "
                                "(or species.*.<key> for every species)")
            tables = [s for s in raw.get("species", []) if isinstance(s, dict)]
            found = tables if parts[1] == "*" else [s for s in tables
                                                    if s.get("name") == parts[1]][:1]
            if not found:
                names = [s.get("name") for s in tables]
                raise DeckError(key, f"no species named '{parts[1]}'; species are "
                                + ", ".join(map(str, names)))
            for target in found:
                for other in group_of("species", parts[2]):
                    target.pop(other, None)
                target[parts[2]] = copy.deepcopy(value)
            continue
        node = raw
        for p in parts[:-1]:
            if p not in SECTIONS:
                raise DeckError(key, did_you_mean(p, SECTIONS))
            node = node.setdefault(p, {})
            if not isinstance(node, dict):
                raise DeckError(key, f"{p} is not a table")
        last = parts[-1]
        if len(parts) == 2:
            for other in group_of(parts[0], last):
                node.pop(other, None)
        node[last] = value
    return raw
