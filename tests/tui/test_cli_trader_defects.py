"""Command-line defects seen when trying the documented examples by hand.

argparse %-formats help strings but not descriptions, epilogs or error messages
from a type function [L: Python argparse docs], so "%%" there prints as two
signs. ``demo-path`` lets README examples use the bundled demo files.
"""

from __future__ import annotations

import os

import pytest

from chaintriage.tui.cli import main as cli


@pytest.mark.parametrize("command", ["table", "expiries", "check", "open", "demo-path"])
def test_help_has_no_literal_double_percent(command, capsys):
    with pytest.raises(SystemExit):
        cli.main([command, "--help"])
    assert "%%" not in capsys.readouterr().out


def test_confidence_error_has_no_literal_double_percent(capsys):
    with pytest.raises(SystemExit):
        cli.main(["table", "--confidence", "1.5", "x.csv"])
    err = capsys.readouterr().err
    assert "between 0 and 1" in err and "%%" not in err and "0% and 100%" in err


def test_demo_path_prints_the_folder_of_the_bundled_demo_files(capsys):
    assert cli.main(["demo-path"]) == 0
    folder = capsys.readouterr().out.strip()
    assert os.path.isdir(folder)
    names = sorted(n for n in os.listdir(folder) if n.endswith(".csv"))
    assert "ospx_2026-12-01.csv" in names and "messy_export.csv" in names
    assert cli.main(["demo-path", "--files"]) == 0
    listed = capsys.readouterr().out.split()
    assert listed == [os.path.join(folder, n) for n in names]


def test_readme_style_example_on_the_demo_path_runs(capsys):
    cli.main(["demo-path"])
    folder = capsys.readouterr().out.strip()
    code = cli.main(["check", os.path.join(folder, "ospx_2026-12-01.csv")])
    assert code in (0, 1)
    assert "OSPX" in capsys.readouterr().out


def test_demo_path_with_a_name_prints_that_file_or_says_which_exist(capsys):
    assert cli.main(["demo-path", "messy"]) == 0
    path = capsys.readouterr().out.strip()
    assert os.path.basename(path) == "messy_export.csv" and os.path.isfile(path)
    assert cli.main(["demo-path", "nosuch"]) == 2
    assert "ospx_2026-12-01.csv" in capsys.readouterr().err
