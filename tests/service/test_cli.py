"""The fieldrate command: registered subcommands and the database upgrade."""

from __future__ import annotations

import pytest

from service.cli import COMMAND_MODULES, build_parser, main
from service.db import make_engine
from service.migrate import current_revision, head_revision


def test_subcommands_registered():
    help_text = build_parser().format_help()
    assert "serve" in help_text and "db" in help_text
    assert "service.commands.serve" in COMMAND_MODULES


def test_db_upgrade(tmp_path, capsys):
    url = f"sqlite:///{tmp_path / 'cli.db'}"
    assert main(["db", "upgrade", "--database-url", url]) == 0
    assert head_revision() in capsys.readouterr().out
    engine = make_engine(url)
    try:
        assert current_revision(engine) == head_revision()
    finally:
        engine.dispose()


def test_no_command_prints_help(capsys):
    assert main([]) == 2
    assert "usage" in capsys.readouterr().out


def test_unknown_command_exits():
    with pytest.raises(SystemExit):
        main(["frobnicate"])
