"""How a deck key is declared: once, as a dataclass field of its section.

A deck key is a field of a frozen section dataclass (:mod:`streamsim.deck.schema`) made by
:func:`deck_key`, which stores a :class:`Key` (type, default, range check, choices, help, when it
is written out) in the field's metadata. Everything else is derived from those fields:

* the schema of a section (:func:`schema_of`), hence the "known keys" of the did-you-mean
  messages, of ``check_key_path`` (``--set`` and scan-file axes) and of validation;
* coercion and range checks (:mod:`streamsim.deck.validate`);
* the section's constructor call (:func:`build`);
* the section as TOML-ready data for ``to_dict``/``to_toml`` (:func:`section_dict`).

A key that is read but not kept as such (``species.drift_beta``, kept as ``drift_u``) is a
:class:`Key` in the section's ``INPUT_KEYS`` class variable.
"""
from __future__ import annotations

import dataclasses
import functools
import math
from dataclasses import dataclass
from typing import Any, Callable

__all__ = ["REQUIRED", "Key", "deck_key", "schema_of", "build", "section_dict",
           "ge", "finite_pos", "finite_nonneg", "between"]

#: the default of a key the deck must give
REQUIRED = object()


@dataclass(frozen=True)
class Key:
    """One deck key. ``kind`` is one of "float", "int", "str", "bool", "int_list", "str_list",
    "float_or_auto", "float_or_measured", "int_list_or_band", "float_map_or_auto", "table"
    (a CSV path or an inline table of rows, streamsim.distribution_table)."""
    kind: str
    default: Any = REQUIRED                       # the value when the deck leaves the key out
    check: Callable[[Any], str | None] | None = None   # range rule: None, or what is wrong
    choices: tuple[str, ...] = ()                 # the words a "str" key accepts
    help: str = ""                                # one line: meaning and unit
    write: Any = True     # in to_dict: True, False (a physical form, shown as a comment), "if_set"
    #                      (only when not None) or a predicate of the section object
    applies: tuple[str, Any] | None = None   # (other key, value): the key only means something
    #                      when that key of the same section has that value (e.g. drive.phase
    #                      with profile = "sine"); it is written only then
    required_when_applies: bool = False      # ... and must then be given
    to_toml: Callable[[Any], Any] | None = None   # stored value -> TOML value (default: tuples
    #                                              become lists)


def deck_key(kind: str, default: Any = REQUIRED, *, check=None, choices=(), help: str = "",
             write: Any = True, applies=None, required_when_applies: bool = False, to_toml=None,
             field_default: Any = dataclasses.MISSING, compare: bool = True):
    """A dataclass field that is a deck key (see :class:`Key`). ``field_default`` is the
    dataclass default of the field (for fields after ones with defaults), not the deck's."""
    key = Key(kind, default, check, tuple(choices), help, write, applies,
              required_when_applies, to_toml)
    return dataclasses.field(default=field_default, compare=compare, metadata={"deck": key})


@functools.lru_cache(maxsize=None)
def _schema(cls) -> tuple[tuple[str, Key], ...]:
    out = [(f.name, f.metadata["deck"]) for f in dataclasses.fields(cls) if "deck" in f.metadata]
    out += list(getattr(cls, "INPUT_KEYS", {}).items())
    return tuple(out)


def schema_of(cls) -> dict[str, Key]:
    """The deck keys of a section dataclass, in declaration order: its ``deck_key`` fields,
    then its ``INPUT_KEYS``."""
    return dict(_schema(cls))


def build(cls, values: dict, **computed):
    """``cls(...)`` from validated ``values`` (one per deck key) and the ``computed`` fields;
    keys of ``INPUT_KEYS`` are not fields and are left out."""
    stored = {f.name for f in dataclasses.fields(cls)}
    kwargs = {k: values[k] for k in schema_of(cls) if k in stored and k not in computed}
    return cls(**kwargs, **computed)


def _toml(value: Any) -> Any:
    return list(value) if isinstance(value, tuple) else value


def section_dict(obj) -> dict:
    """A section object as TOML-ready data: every key whose ``write`` rule allows it."""
    out = {}
    stored = type(obj).__dataclass_fields__
    for name, key in _schema(type(obj)):
        if name not in stored:          # an INPUT_KEYS key, kept in another form
            continue
        value = getattr(obj, name)
        if key.applies is not None and getattr(obj, key.applies[0]) != key.applies[1]:
            continue
        write = key.write
        if write is False or (write == "if_set" and value is None) or (
                callable(write) and not write(obj)):
            continue
        out[name] = key.to_toml(value) if key.to_toml else _toml(value)
    return out


# range rules shared by many keys
def ge(lo):
    return lambda v: None if v >= lo else f"must be >= {lo:g}"


def between(lo, hi):
    return lambda v: None if lo <= v <= hi else f"must be between {lo} and {hi}"


def finite_pos(v):
    return None if (math.isfinite(v) and v > 0) else "must be a finite number > 0"


def finite_nonneg(v):
    return None if (math.isfinite(v) and v >= 0) else "must be >= 0"
