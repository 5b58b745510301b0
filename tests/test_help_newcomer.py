"""A newcomer's first look: ``rhofollow COMMAND --help`` at 80 columns, from an empty folder.

For every command and every ``log`` action: the help exits with status 0, writes nothing into the
working folder, keeps every line within 80 columns, and every option and argument has a help text.
Layout rules are this project's own (common practice, no source).
"""
from __future__ import annotations

import argparse

import pytest

from rhofollow.cli import build_parser, main

WIDTH = 80


def _command_parsers(parser: argparse.ArgumentParser, path: tuple[str, ...] = ()):
    """(command path, parser) for the top level, every command and every sub-action, in help order."""
    yield path, parser
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            for name, sub in action.choices.items():
                yield from _command_parsers(sub, path + (name,))


PARSERS = dict(_command_parsers(build_parser()))


def test_every_command_is_covered():
    """The walk reaches every command of the CLI and the log actions (a new command is tested too)."""
    from rhofollow.cli import COMMANDS

    assert {p[0] for p in PARSERS if p} == set(COMMANDS)
    assert ("log", "rv") in PARSERS and ("log", "update") in PARSERS


@pytest.mark.parametrize("path", list(PARSERS), ids=lambda p: " ".join(p) or "rhofollow")
def test_help_fits_80_columns_and_names_every_option(path, tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    monkeypatch.setenv("COLUMNS", str(WIDTH))
    with pytest.raises(SystemExit) as stop:
        main([*path, "--help"])
    assert stop.value.code == 0
    out, err = capsys.readouterr()
    assert err == ""
    assert f"usage: rhofollow {' '.join(path)}".rstrip() in out
    too_wide = [line for line in out.splitlines() if len(line) > WIDTH]
    assert not too_wide, f"help lines wider than {WIDTH} columns: {too_wide}"
    assert list(tmp_path.iterdir()) == [], "--help wrote into the working folder"

    undocumented = [a.option_strings[0] if a.option_strings else a.dest
                    for a in PARSERS[path]._actions
                    if not isinstance(a, argparse._SubParsersAction)
                    and (a.help is None or not str(a.help).strip())]
    assert not undocumented, f"options without a help text: {undocumented}"
