"""Every CLI command's help keeps the unit hints written in the source ("[s]", "[kg]",
"[Hz]"), and bad usage, unknown options and --version end in one message, never a
traceback."""

from __future__ import annotations

import re

import pytest
import typer

from qualplan import __version__
from qualplan.cli import main
from qualplan.cli.base import app

UNIT = re.compile(r"\[[^\]\s][^\]]*\]")


def is_group(cmd) -> bool:
    # typer 0.29 carries its own copy of click: a group is what has sub-commands
    return isinstance(getattr(cmd, "commands", None), dict)


def commands() -> list[tuple[list[str], object]]:
    root = typer.main.get_command(app)
    out: list[tuple[list[str], object]] = []

    def walk(cmd, path: list[str]) -> None:
        out.append((path, cmd))
        if is_group(cmd):
            for name, sub in cmd.commands.items():
                walk(sub, [*path, name])

    walk(root, [])
    return out


ALL = commands()


def squash(text: str) -> str:
    return re.sub(r"\s+", " ", text)


def run(capsys, argv: list[str]) -> tuple[int, str, str]:
    with pytest.raises(SystemExit) as exc:
        main(argv)
        raise SystemExit(0)
    out = capsys.readouterr()
    return exc.value.code or 0, out.out, out.err


def test_there_are_many_commands():
    assert len([c for _, c in ALL if not is_group(c)]) > 40


@pytest.mark.parametrize("path,cmd", ALL, ids=[" ".join(p) or "qualplan" for p, _ in ALL])
def test_help_keeps_every_unit_hint(capsys, path, cmd):
    hints = []
    for p in cmd.params:
        hints += UNIT.findall(getattr(p, "help", None) or "")
    hints += UNIT.findall(cmd.help or "")
    code, out, err = run(capsys, [*path, "--help"])
    assert code == 0, err
    shown = squash(out)
    for hint in hints:
        assert hint in shown, f"{' '.join(path)}: {hint} lost from the help"


def test_unit_hints_exist_in_the_source():
    """The check above has something to check: the source writes unit hints."""
    hints = {h for _, c in ALL for p in c.params for h in UNIT.findall(getattr(p, "help", "")
                                                                      or "")}
    assert {"[Hz]", "[s]"} <= hints


def test_version_option_and_command(capsys):
    assert run(capsys, ["--version"])[:2] == (0, f"{__version__}\n")
    assert run(capsys, ["version"])[:2] == (0, f"{__version__}\n")


@pytest.mark.parametrize("path,cmd", [(p, c) for p, c in ALL if p],
                         ids=[" ".join(p) for p, _ in ALL if p])
def test_unknown_option_is_one_message(capsys, path, cmd):
    code, out, err = run(capsys, [*path, "--no-such-option"])
    assert code == 2
    assert "Traceback" not in out + err
    assert "No such option: --no-such-option" in err


@pytest.mark.parametrize("argv,says", [
    (["no-such-command"], "No such command"),
    (["level", "show", "abc"], "Invalid value for 'level_id'"),
    (["level", "derive"], "Missing argument"),
    (["level", "export", "1", "--digits", "0"], "--digits"),
])
def test_bad_usage_is_one_message(capsys, argv, says):
    code, out, err = run(capsys, argv)
    assert code == 2 and "Traceback" not in out + err
    assert says in err
