"""The deck: what to simulate, read from TOML, validated into frozen dataclasses.

The key names here are a contract that scripts and scans rely on (see README, "Deck reference").
Every key is declared once, as a field of its section dataclass in :mod:`.schema` (type,
default, range, help; see :mod:`.keys`); the key tables, validation, ``to_dict``/``to_toml`` and
the known-keys lists of did-you-mean messages, ``--set`` and scan files are derived from those
fields. An unknown key is rejected with a "did you mean"; every problem is one
:class:`DeckError` naming the key, its value and what is wrong.

The parts, each one job:

* :mod:`.errors`: the one error family for user input (:class:`InputError`, with
  :class:`DeckError` here and ``ScanError`` in :mod:`streamsim.scan.spec`), the one
  :func:`did_you_mean` and the one value formatter :func:`show_value`;
* :mod:`.keys` and :mod:`.schema`: how a key is declared, the dataclasses, the renamed keys and
  the one table of exclusive groups;
* :mod:`.validate`: :func:`validate` checks the raw TOML table and builds a :class:`Deck` whose
  derived values are still open (``None``);
* :mod:`.resolve`: :func:`resolve` fills them in (box length from the linear theory or from
  centimetres, ``dt = "auto"`` from the numerical-health rules, theta from keV, the cadences
  from ``time.end``) and names a slipped input (a density in m^-3, a temperature in eV);
* :mod:`.overrides`: ``--set`` overrides;
* :mod:`.reading`: TOML files, the default deck and the one public :func:`load_deck`.

No physics lives here beyond asking the theory, health and units modules.
"""
from __future__ import annotations

from .errors import DeckError, InputError, did_you_mean, show_value
from .keys import REQUIRED, Key, deck_key, schema_of, section_dict
from .overrides import apply_overrides, parse_override
from .reading import DEFAULT_DECK, load_deck, read_toml, read_toml_file, upgrade_written
from .resolve import resolve
from .schema import (ALL_TOP, EXCLUSIVE, METHODS, OPTIONAL_SECTIONS, RENAMED_KEYS, SECTIONS,
                     SPECIES, TOP, VLASOV_IGNORED_KEYS, Analysis, Box, Deck, Drive, Exclusive,
                     Output, Perturbation, Species, Time, Units, Vlasov, check_key_path,
                     exclusive_keys)
from .validate import validate

__all__ = [
    "InputError", "DeckError", "did_you_mean", "show_value",
    "Deck", "Species", "Box", "Time", "Units", "Perturbation", "Output", "Analysis", "Drive",
    "Vlasov", "METHODS", "VLASOV_IGNORED_KEYS",
    "load_deck", "validate", "resolve", "apply_overrides", "parse_override", "check_key_path",
    "exclusive_keys", "RENAMED_KEYS", "EXCLUSIVE", "DEFAULT_DECK",
    "Key", "deck_key", "schema_of", "section_dict",
]

# the key tables under their former private names (read by the deck-error tests)
_SPECIES = SPECIES
_UNITS, _BOX, _TIME = SECTIONS["units"], SECTIONS["box"], SECTIONS["time"]
