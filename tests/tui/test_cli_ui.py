"""``faultfind ui`` and plain ``faultfind`` (cli.md): the command and its errors.

Outside reference: cli.md fixes the command names and the exit status (2 for
bad input, with a message naming the file; never a traceback).
"""

from __future__ import annotations

from faultfind.cli.main import build_parser, main
from faultfind.cli.ui import needs_terminal


class _NotATTY:
    def isatty(self):
        return False


def test_ui_command_is_registered():
    args = build_parser().parse_args(["ui", "x.toml", "--logbook", "lb.sqlite"])
    assert args.command == "ui" and args.circuit == "x.toml" and args.logbook == "lb.sqlite"
    args = build_parser().parse_args(["ui"])
    assert args.circuit is None


def test_ui_with_a_missing_circuit_exits_2_naming_it(tmp_path, capsys):
    missing = tmp_path / "nowhere.toml"
    assert main(["ui", str(missing), "--logbook", str(tmp_path / "lb.sqlite")]) == 2
    err = capsys.readouterr().err
    assert "nowhere.toml" in err and "Traceback" not in err
    assert not (tmp_path / "lb.sqlite").exists()


def test_ui_with_a_folder_as_logbook_exits_2(tmp_path, capsys):
    assert main(["ui", "--logbook", str(tmp_path)]) == 2
    assert "folder" in capsys.readouterr().err


def test_ui_without_a_terminal_exits_2(tmp_path, capsys):
    # pytest captures standard output: it is not a terminal
    assert main(["ui", "--logbook", str(tmp_path / "lb.sqlite")]) == 2
    assert "terminal" in capsys.readouterr().err
    assert not (tmp_path / "lb.sqlite").exists()


def test_plain_faultfind_without_a_terminal_prints_help(capsys):
    assert main([]) == 0
    out = capsys.readouterr().out
    assert "ui" in out and "usage" in out.lower()


def test_needs_terminal():
    assert needs_terminal(_NotATTY(), _NotATTY())
    assert needs_terminal(object(), object())
