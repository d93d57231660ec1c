"""Every subcommand answers --help with a worked example; the top-level command behaves."""

import pytest

from surfgeo import __version__
from surfgeo.cli.main import command_modules, main

NAMES = [m.__name__.rsplit(".", 1)[-1] for m in command_modules()]


def test_version(capsys):
    with pytest.raises(SystemExit) as exc:
        main(["--version"])
    assert exc.value.code == 0
    assert __version__ in capsys.readouterr().out


def test_no_command_prints_help_and_fails(capsys):
    assert main([]) == 2
    assert "usage" in capsys.readouterr().out


@pytest.mark.parametrize("name", NAMES)
def test_every_subcommand_help_has_an_example(name, capsys):
    with pytest.raises(SystemExit) as exc:
        main([name, "--help"])
    assert exc.value.code == 0
    out = capsys.readouterr().out
    assert "example" in out.lower()
    assert f"surfgeo {name}" in out
