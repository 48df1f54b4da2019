"""The command line: version, help, and one-line errors with exit status 2."""

import pytest

from tracecoil import __version__
from tracecoil.cli import COMMANDS, main


def test_version(capsys):
    with pytest.raises(SystemExit) as e:
        main(["--version"])
    assert e.value.code == 0
    assert __version__ in capsys.readouterr().out


def test_help_lists_every_command(capsys):
    with pytest.raises(SystemExit):
        main(["--help"])
    out = capsys.readouterr().out
    for name in COMMANDS:
        assert name in out


def test_output_folder_that_is_a_file(tmp_path, capsys):
    blocker = tmp_path / "afile"
    blocker.write_text("x")
    assert main(["build", "hexagon-return", "--out", str(blocker), "--no-check"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "tracecoil build: error:" in err[0] and "afile" in err[0]
    assert [p.name for p in tmp_path.iterdir()] == ["afile"]  # nothing else written


def test_unknown_template_and_missing_file(capsys):
    assert main(["build", "no-such-design"]) == 2
    assert "no template named 'no-such-design'" in capsys.readouterr().err
    assert main(["build", "missing.toml"]) == 2
    assert "does not exist" in capsys.readouterr().err
