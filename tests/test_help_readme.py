"""Help = README: the options each subcommand's parser declares and the options README's
"Commands" section lists are the same, with the same metavariables and the same "one value per
flag, repeat the flag" / "several values after one flag" form.

This compares two texts of the project with each other (no physics): the parsers are built
through the CLI's own ``build_parser`` and read, README.md is parsed as text. A new option
without its README row, a README row for an option that is gone, a renamed metavariable or a
repeatable flag written as ``--flag X ...`` all fail here. So does an old deck or scan-file key
name (``RENAMED_KEYS``, ``RENAMED_SCAN_KEYS``) anywhere in README but its "Renamed keys" table.
"""
from __future__ import annotations

import argparse
import re
from pathlib import Path

import pytest

from streamsim.cli import COMMANDS, build_parser

README = Path(__file__).resolve().parents[1] / "README.md"

OPTION = re.compile(r"(?<![\w-])--[a-z][a-z0-9-]*")


# --------------------------------------------------------------------------------------------
# the parsers
# --------------------------------------------------------------------------------------------
def _subparsers() -> dict[str, argparse.ArgumentParser]:
    parser = build_parser()
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            return dict(action.choices)
    raise AssertionError("streamsim's parser has no subcommands")


SUB = _subparsers()


def _options(parser) -> dict[str, argparse.Action]:
    """Long option string -> its action, without argparse's own -h/--help."""
    out = {}
    for a in parser._actions:
        if isinstance(a, argparse._HelpAction) or not a.option_strings:
            continue
        longs = [s for s in a.option_strings if s.startswith("--")]
        assert longs, f"{a.option_strings}: every option has a long form"
        for s in longs:
            out[s] = a
    return out


def _positionals(parser) -> list[argparse.Action]:
    return [a for a in parser._actions if not a.option_strings
            and not isinstance(a, argparse._SubParsersAction)]


def invocation(flag: str, a: argparse.Action) -> str:
    """How README writes the option: the flag with its metavariable in argparse's nargs form."""
    if a.nargs == 0:
        return flag
    m = a.metavar or a.dest.upper()
    forms = {None: f"{flag} {m}", "?": f"{flag} [{m}]", "+": f"{flag} {m} [{m} ...]",
             "*": f"{flag} [{m} ...]"}
    if a.nargs not in forms:
        raise AssertionError(f"{flag}: nargs {a.nargs!r} has no README form here; add one")
    return forms[a.nargs]


def _positional_form(a: argparse.Action) -> str:
    m = a.metavar or a.dest.upper()
    return f"[{m}]" if a.nargs == "?" else m


# --------------------------------------------------------------------------------------------
# README
# --------------------------------------------------------------------------------------------
def _section(text: str, heading: str) -> str:
    start = text.index(f"\n## {heading}\n")
    end = text.find("\n## ", start + 1)
    return text[start:end if end >= 0 else None]


TEXT = README.read_text(encoding="utf-8")
COMMANDS_SECTION = _section(TEXT, "Commands")


def _cells(line: str) -> list[str]:
    """The cells of a markdown table row (``\\|`` inside a cell is a literal bar)."""
    parts = re.split(r"(?<!\\)\|", line.strip())
    return [c.strip().replace("\\|", "|") for c in parts[1:-1]]


def _synopses() -> dict[str, str]:
    """command -> its synopsis (the code span of its row in the command table)."""
    out = {}
    for line in COMMANDS_SECTION.splitlines():
        if line.startswith("| `streamsim "):
            span = re.match(r"`([^`]*)`", _cells(line)[0]).group(1)
            name = span.split()[1]
            assert name not in out, f"two rows for `streamsim {name}` in the command table"
            out[name] = span
    return out


def _option_rows() -> list[tuple[str, set[str], str]]:
    """(option as written, commands, the whole row) of the options table."""
    rows = []
    for line in COMMANDS_SECTION.splitlines():
        if line.startswith("| `--"):
            cells = _cells(line)
            assert len(cells) == 3, f"an options row has 3 cells: {line}"
            opt = re.fullmatch(r"`([^`]*)`", cells[0])
            assert opt, f"one option per row, as a code span: {cells[0]}"
            cmds = set(re.findall(r"\b(" + "|".join(COMMANDS) + r")\b",
                                  re.sub(r"`[^`]*`", "", cells[1])))
            assert cmds, f"no command named in {cells[1]!r}"
            rows.append((opt.group(1), cmds, line))
    return rows


SYNOPSES = _synopses()
OPTION_ROWS = _option_rows()


def test_readme_parsed():
    """The parsing above found what it looks for (so the checks below are not vacuous)."""
    assert set(SYNOPSES) == set(COMMANDS) == set(SUB)
    assert len(OPTION_ROWS) >= sum(len(_options(p)) for p in SUB.values()) // 2


# --------------------------------------------------------------------------------------------
# the command table: each synopsis lists exactly the parser's options, in the parser's form
# --------------------------------------------------------------------------------------------
@pytest.mark.parametrize("name", list(COMMANDS))
def test_synopsis_lists_every_option_of_the_parser(name):
    synopsis, opts = SYNOPSES[name], _options(SUB[name])
    listed = set(OPTION.findall(synopsis))
    assert not listed - set(opts), (f"README lists {sorted(listed - set(opts))} for "
                                    f"`streamsim {name}`, which its parser does not have")
    assert not set(opts) - listed, (f"`streamsim {name}` has {sorted(set(opts) - listed)}, "
                                    f"missing from README's command table")
    for flag, a in opts.items():
        form = invocation(flag, a)
        if isinstance(a, argparse._AppendAction):
            # one value per flag, repeatable: "[--set KEY=VALUE]...", never "--set KEY=VALUE ..."
            assert f"[{form}]..." in synopsis, (f"`streamsim {name}`: README should write "
                                                f"[{form}]... (a repeatable flag)")
        else:
            assert re.search(re.escape(form) + r"(?=[\]\s|]|$)", synopsis), (
                f"`streamsim {name}`: README should write {form!r}")
    for a in _positionals(SUB[name]):
        assert f" {_positional_form(a)}" in synopsis, (
            f"`streamsim {name}`: README should name the argument {_positional_form(a)}")


def test_version_flag_in_readme():
    top = {s for a in build_parser()._actions for s in a.option_strings if s.startswith("--")}
    top.discard("--help")
    for flag in top:
        assert f"streamsim {flag}" in COMMANDS_SECTION


# --------------------------------------------------------------------------------------------
# the options table: one row per (option, command), in the parser's form, and no stale row
# --------------------------------------------------------------------------------------------
@pytest.mark.parametrize("name", list(COMMANDS))
def test_every_option_has_its_meaning_row(name):
    for flag, a in _options(SUB[name]).items():
        form = invocation(flag, a)
        rows = [r for r in OPTION_ROWS if r[0] == form and name in r[1]]
        assert rows, (f"`streamsim {name} {form}`: no row of README's options table "
                      f"('| `{form}` | ... {name} ... | meaning |')")
        assert len(rows) == 1, f"`streamsim {name} {form}`: {len(rows)} rows, one wanted"


def test_every_options_row_exists_in_its_parsers():
    for written, cmds, line in OPTION_ROWS:
        flag = written.split()[0]
        for name in cmds:
            opts = _options(SUB[name])
            assert flag in opts, f"README: `streamsim {name}` has no {flag} ({line})"
            assert written == invocation(flag, opts[flag]), (
                f"README writes {written!r} for `streamsim {name}`; its parser: "
                f"{invocation(flag, opts[flag])!r}")
        for other in OPTION.findall(line):   # options named in the meaning: of those commands
            assert any(other in _options(SUB[n]) for n in cmds), (
                f"README's row for {written} names {other}, which {sorted(cmds)} lack")


# --------------------------------------------------------------------------------------------
# everywhere else in README: a command line names only options its command has
# --------------------------------------------------------------------------------------------
def _command_lines():
    """(command, text) of every `streamsim COMMAND ...` in README: code spans and lines of
    fenced blocks (a command continued on the next line of a span included)."""
    spans = re.findall(r"`(streamsim [a-z]+[^`]*)`", TEXT)
    fenced = re.findall(r"^(streamsim [a-z]+.*)$", TEXT, flags=re.M)
    for text in spans + fenced:
        name = text.split()[1]
        if name in COMMANDS:
            yield name, text.split("#")[0]


def test_command_lines_in_readme_use_existing_options():
    seen = 0
    for name, text in _command_lines():
        opts = _options(SUB[name])
        for flag in OPTION.findall(text):
            assert flag in opts, f"README: `{text.strip()}`: streamsim {name} has no {flag}"
            seen += 1
    assert seen > 50


def test_synopses_elsewhere_are_complete():
    """A synopsis outside the command table (a command line with [--options]) lists every
    option of its command, as the table does."""
    for name, text in _command_lines():
        if "[--" in text:
            missing = set(_options(SUB[name])) - set(OPTION.findall(text))
            assert not missing, f"README: `{text.strip()}` lacks {sorted(missing)}"


# --------------------------------------------------------------------------------------------
# old key names: in README's "Renamed keys" table only
# --------------------------------------------------------------------------------------------
def _renamed_table() -> set[str]:
    start = TEXT.index("\n### Renamed keys\n")
    end = TEXT.index("\n#", start + 1)
    return {ln for ln in TEXT[start:end].splitlines() if ln.startswith("| `")
            or ln.startswith("| scan file")}


def test_old_key_names_only_in_the_renamed_keys_table():
    from streamsim.deck import RENAMED_KEYS
    from streamsim.deck.schema import SECTIONS, SPECIES, TOP
    from streamsim.scan.spec import RENAMED_SCAN_KEYS
    table = _renamed_table()
    assert len(table) >= len(RENAMED_KEYS) + len(RENAMED_SCAN_KEYS)
    for old, new in {**RENAMED_KEYS, **{f"scan file `{k}`": f"scan file `{v}`"
                                        for k, v in RENAMED_SCAN_KEYS.items()}}.items():
        assert any(old in ln and new in ln for ln in table), (
            f"README's Renamed keys table has no row {old} -> {new}")
    rest = "\n".join(ln for ln in TEXT.splitlines() if ln not in table)
    current = set(TOP) | set(SPECIES) | {k for s in SECTIONS.values() for k in s}
    code = "\n".join(re.findall(r"`([^`\n]+)`", rest)
                     + re.findall(r"^```[a-z]*\n(.*?)^```", rest, flags=re.M | re.S))
    for old in RENAMED_KEYS:
        assert not re.search(rf"(?<![\w.]){re.escape(old)}(?!\w)", rest), (
            f"README names the old key {old} outside the Renamed keys table")
        bare = old.split(".")[-1]
        if bare not in current:   # e.g. diagnostics_every, filter_passes, as a bare key
            assert not re.search(rf"(?<![\w.]){bare}(?!\w)", code), (
                f"README's code names the old key {bare} outside the Renamed keys table")
    # TOML blocks, read section by section: no old key of that section, no old scan-file key
    for block in re.findall(r"^```toml\n(.*?)^```", rest, flags=re.M | re.S):
        section = None
        for line in block.splitlines():
            head = re.match(r"\s*\[+\s*([\w.]+)\s*\]+", line)
            if head:
                section = head.group(1)
                continue
            key = re.match(r"\s*#?\s*(\w+)\s*=", line)
            if not key:
                continue
            if section is None:
                assert key.group(1) not in RENAMED_SCAN_KEYS, f"README's TOML: {line.strip()}"
            else:
                assert f"{section}.{key.group(1)}" not in RENAMED_KEYS, (
                    f"README's TOML [{section}]: {line.strip()}")
