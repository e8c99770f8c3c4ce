"""The commands beyond one trial: ``assurance program``, ``assurance interim`` and
``assurance portfolio`` write their folders as ``assurance plan`` does (claimed before
computing, never replacing what a user owns) and refuse bad files with a message."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from assurance.cli import main

ROOT = Path(__file__).resolve().parents[1]
PROGRAMS = ROOT / "case_studies" / "programs"


@pytest.fixture()
def interim_copy(tmp_path) -> Path:
    folder = tmp_path / "look"
    shutil.copytree(PROGRAMS / "interim_look", folder)
    return folder / "interim.toml"


def test_interim_writes_its_folder_and_marks_it(interim_copy, tmp_path, capsys):
    out = tmp_path / "out"
    assert main(["interim", str(interim_copy), "--out", str(out)]) == 0
    said = capsys.readouterr().out
    assert "Predictive probability of success" in said
    assert (out / "memo.html").is_file() and (out / "figures").is_dir()
    memo = (out / "memo.html").read_text(encoding="utf-8")
    assert f"assurance interim {interim_copy} --out {out}" in memo  # the command, as typed
    # a second run needs --overwrite, and then replaces the folder it wrote
    assert main(["interim", str(interim_copy), "--out", str(out), "-q"]) == 2
    assert "already exists" in capsys.readouterr().err
    assert main(["interim", str(interim_copy), "--out", str(out), "-q", "--overwrite"]) == 0


def test_a_folder_holding_an_input_file_is_never_replaced(interim_copy, capsys):
    folder = interim_copy.parent
    before = sorted(p.name for p in folder.iterdir())
    code = main(["interim", str(interim_copy), "--out", str(folder), "--overwrite", "-q"])
    assert code == 2
    assert "never replaced" in capsys.readouterr().err
    assert sorted(p.name for p in folder.iterdir()) == before


def test_the_default_folder_is_named_after_the_file(interim_copy, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    assert main(["interim", str(interim_copy), "-q"]) == 0
    assert (tmp_path / "interim-interim" / "memo.html").is_file()


@pytest.mark.parametrize("command", ["program", "interim", "portfolio"])
def test_a_bad_file_gives_a_message_and_writes_nothing(command, tmp_path, capsys):
    bad = tmp_path / "bad.toml"
    bad.write_text('title = "x"\nunknown_table_key = 1\n', encoding="utf-8")
    out = tmp_path / "out"
    assert main([command, str(bad), "--out", str(out), "-q"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("assurance: error:") and "Traceback" not in err
    assert not out.exists()


def test_a_missing_file_is_named(tmp_path, capsys):
    assert main(["program", str(tmp_path / "none.toml"), "--out", str(tmp_path / "o")]) == 2
    assert "none.toml" in capsys.readouterr().err


def test_program_writes_its_folder(tmp_path, capsys):
    out = tmp_path / "program"
    assert main(["program", str(PROGRAMS / "phase2_then_phase3" / "program.toml"), "--out",
                 str(out), "-q"]) == 0
    assert (out / "memo.html").is_file()
    assert capsys.readouterr().out == ""  # --quiet prints nothing but errors


def test_a_portfolio_never_replaces_a_folder_holding_a_design_it_names(tmp_path, capsys):
    # the design file sits in a folder assurance wrote earlier; the portfolio names it and
    # asks to replace that folder: refused after reading, and the folder is unchanged
    earlier = tmp_path / "earlier"
    assert main(["plan", str(ROOT / "case_studies" / "knee_pain" / "design.toml"), "--out",
                 str(earlier), "-q"]) == 0
    before = sorted(p.name for p in earlier.iterdir())
    portfolio = tmp_path / "portfolio.toml"
    portfolio.write_text('title = "Invented"\n[[trial]]\nname = "knee"\n'
                         'design = "earlier/design.toml"\n', encoding="utf-8")
    code = main(["portfolio", str(portfolio), "--out", str(earlier), "--overwrite", "-q"])
    assert code == 2
    assert "holds the design file" in capsys.readouterr().err
    assert sorted(p.name for p in earlier.iterdir()) == before
