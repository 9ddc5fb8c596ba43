"""The README says what the code does: its commands section and its settings table, checked both ways."""

from __future__ import annotations

import re
from pathlib import Path

import click
import pytest

from stockroom import settings
from stockroom.cli import main

README = Path(__file__).resolve().parent.parent / "README.md"


def _section(title: str) -> str:
    """The text of the README's `## title` section, up to the next `## ` heading."""
    text = README.read_text(encoding="utf-8")
    found = re.search(rf"^## {re.escape(title)}\n(.*?)(?=^## |\Z)", text, flags=re.M | re.S)
    assert found, f"README.md has no '## {title}' section"
    return found.group(1)


# ---------------------------------------------------------------- commands


def _readme_command_lines() -> dict[str, str]:
    """Command name -> its line in the indented block of README's Commands section (one command a line)."""
    lines: dict[str, str] = {}
    for line in _section("Commands").splitlines():
        found = re.match(r"^ {4}stockroom ([a-z][a-z-]*)(.*)$", line)
        if found:
            name = found.group(1)
            assert name not in lines, f"README lists `stockroom {name}` twice"
            lines[name] = found.group(2)
    return lines


def test_readme_lists_exactly_the_commands_that_exist():
    listed = set(_readme_command_lines())
    existing = set(main.commands)
    assert listed - existing == set(), "README lists commands that do not exist"
    assert existing - listed == set(), "commands missing from README's Commands section"


@pytest.mark.parametrize("name", sorted(main.commands))
def test_readme_names_only_options_the_command_has(name):
    line = _readme_command_lines().get(name, "")
    command = main.commands[name]
    known = {opt for p in command.params if isinstance(p, click.Option) for opt in p.opts}
    named = set(re.findall(r"(?<![\w-])--[a-z][a-z-]*", line))
    assert named - known == set(), f"README's line for `stockroom {name}` names options it does not have"
    arguments = [p.human_readable_name for p in command.params if isinstance(p, click.Argument)]
    for argument in arguments:
        assert re.search(rf"\b{argument}\b", line), f"README's line for `stockroom {name}` does not show {argument}"


# ---------------------------------------------------------------- settings
#
# How the table is read (the rule the README follows):
# - the first column holds one or more setting names in backticks, separated by commas;
# - a name ending in `_*` is a family: it stands for every declared setting whose name starts with the
#   prefix and that no row names on its own (BALANCE_* is BALANCE_READABILITY_G and BALANCE_LINEARITY_G),
#   and must stand for at least one;
# - every declared setting is covered by exactly one row, and every name or family matches something;
# - the default column holds exactly one value in backticks per setting covered, in the order the row
#   names them (a family's members in the order settings.py declares them); anything outside backticks
#   (units, a gloss) is commentary. A value is compared by the setting's kind: numbers as numbers
#   (`2.1e-4` matches 0.00021), `true`/`false` for switches, `none` for no default, `""` for empty text.


def _table_rows() -> list[tuple[list[str], list[str]]]:
    """(names, backticked default values) of each row of the Configuration section's table."""
    rows = []
    for line in _section("Configuration").splitlines():
        if not line.startswith("|"):
            continue
        cells = [c.strip() for c in line.strip().strip("|").split("|")]
        if cells[0] == "setting" or set(cells[0]) <= {"-", ":"}:
            continue  # the header and its rule
        assert len(cells) == 3 and cells[2], f"a settings row needs a name, a default and a meaning: {line}"
        names = re.findall(r"`([A-Z][A-Z0-9_]*\*?)`", cells[0])
        assert names, f"no setting name in backticks: {line}"
        rows.append((names, re.findall(r"`([^`]*)`", cells[1])))
    assert rows, "README's Configuration section has no settings table"
    return rows


def _matches(setting: settings.Setting, written: str) -> bool:
    if setting.default is None:
        return written == "none"
    if setting.kind is bool:
        return written == ("true" if setting.default else "false")
    if setting.kind in (int, float):
        try:
            return float(written) == float(setting.default)
        except ValueError:
            return False
    return written == ('""' if setting.default == "" else setting.default)


def _covered() -> list[tuple[list[settings.Setting], list[str]]]:
    declared = {s.name: s for s in settings.SETTINGS}
    rows = _table_rows()
    named_alone = {n for names, _ in rows for n in names if not n.endswith("*")}
    out = []
    for names, values in rows:
        members: list[settings.Setting] = []
        for name in names:
            if name.endswith("_*"):
                family = [s for s in settings.SETTINGS if s.name.startswith(name[:-1]) and s.name not in named_alone]
                assert family, f"README's family {name} matches no setting"
                members += family
            else:
                assert name in declared, f"README's settings table names {name}, which settings.py does not declare"
                members.append(declared[name])
        out.append((members, values))
    return out


def test_settings_table_covers_every_declared_setting_exactly_once():
    covered = [s.name for members, _ in _covered() for s in members]
    assert sorted(covered) == sorted(s.name for s in settings.SETTINGS)
    assert len(covered) == len(set(covered)), "a setting is covered by two rows"


def test_settings_table_shows_the_declared_defaults():
    for members, values in _covered():
        names = [s.name for s in members]
        assert len(values) == len(members), f"{names}: one backticked default per setting, got {values}"
        for setting, written in zip(members, values, strict=True):
            assert _matches(setting, written), (
                f"README gives {setting.name} the default {written}; settings.py: {setting.default!r}"
            )


def test_the_family_rule_reads_the_table_as_documented():
    """The rule above, on the real table: BALANCE_* stands for exactly the two balance settings."""
    by_row = {tuple(s.name for s in members) for members, _ in _covered()}
    assert ("BALANCE_READABILITY_G", "BALANCE_LINEARITY_G") in by_row
    assert ("BURETTE_CAPACITY_ML", "BURETTE_TOLERANCE_ML") in by_row
    assert _matches(settings.Setting("X", 0.00021, "", float), "2.1e-4")
    assert not _matches(settings.Setting("X", 0.00021, "", float), "2.1e-5")
    assert _matches(settings.Setting("X", "", ""), '""') and not _matches(settings.Setting("X", None, ""), '""')


def test_environment_variables_named_in_the_readme_exist():
    """Every STOCKROOM_<NAME> the README mentions is a setting or a variable the CLI reads."""
    from stockroom import cli

    cli_source = Path(cli.__file__).read_text(encoding="utf-8")
    declared = {s.name for s in settings.SETTINGS}
    for variable in set(re.findall(r"STOCKROOM_([A-Z_]+)", README.read_text(encoding="utf-8"))):
        assert variable in declared or f'"STOCKROOM_{variable}"' in cli_source, f"README names STOCKROOM_{variable}"
