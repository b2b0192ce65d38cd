"""The linter reference (docs/linter.md) names every command, option, output format and policy
key the program has, and its example policy is one the program accepts: the reference is
compared with the argument parser and the configuration's key lists, so neither can drift."""

from __future__ import annotations

import argparse
import re
import tomllib
from pathlib import Path

import pytest

from eigengate import cli
from eigengate.rules.waivers import CONFIG_WAIVER_KEYS
from eigengate.scan.config import CONFIG_KEYS, OVERRIDE_KEYS, parse_config

DOCS = Path(__file__).resolve().parents[1] / "docs"
LINTER = (DOCS / "linter.md").read_text(encoding="utf-8")


def _commands(parser: argparse.ArgumentParser, prefix=()):
    """(command words, sub-parser) for every command and sub-command."""
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            for name, sub in action.choices.items():
                yield (*prefix, name), sub
                yield from _commands(sub, (*prefix, name))


def _options(parser: argparse.ArgumentParser):
    for action in parser._actions:
        if isinstance(action, (argparse._HelpAction, argparse._SubParsersAction)):
            continue
        yield from (o for o in action.option_strings)


COMMANDS = list(_commands(cli._parser()))


def test_every_command_is_in_the_reference():
    for words, _ in COMMANDS:
        assert f"eigengate {' '.join(words)}" in LINTER or \
            f"`{' '.join(words)} " in LINTER, words


@pytest.mark.parametrize("words, sub", COMMANDS, ids=lambda x: " ".join(x)
                         if isinstance(x, tuple) else "")
def test_every_option_is_in_the_reference(words, sub):
    for option in _options(sub):
        assert re.search(rf"`{re.escape(option)}[` ]", LINTER), (words, option)


def test_every_format_is_in_the_reference():
    row = next(line for line in LINTER.splitlines() if line.startswith("| `--format FMT`"))
    for fmt in cli.FORMATS:
        assert f"`{fmt}`" in row, fmt
    report_formats = (DOCS / "report-formats.md").read_text(encoding="utf-8")
    for fmt in cli.FORMATS:
        if fmt != "text":
            assert fmt.lower() in report_formats.lower(), fmt


def _example_policy() -> dict:
    block = LINTER.split("## Configuration: `[tool.eigengate]`", 1)[1]
    toml = block.split("```toml\n", 1)[1].split("```", 1)[0]
    return tomllib.loads(toml)["tool"]["eigengate"]


def test_every_policy_key_is_in_the_example_policy(tmp_path):
    table = _example_policy()
    assert set(CONFIG_KEYS) <= set(table), set(CONFIG_KEYS) - set(table)
    assert set(OVERRIDE_KEYS) <= set(table["overrides"][0])
    assert set(CONFIG_WAIVER_KEYS) <= set(table["waivers"][0])
    # and the program accepts it as written (cluster needs a scheduler's address only)
    config = parse_config(table, root=tmp_path)
    assert config.waiver_warning_days == table["waiver_warning_days"]
    assert config.baseline == table["baseline"]
