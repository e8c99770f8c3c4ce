"""Nothing a user owns is ever lost by writing an output folder.

Each case of the hardening issue has a test here: ``--overwrite`` replaces only a folder this
package wrote that holds nothing else (never the design file's folder, the current folder or
a folder of the user's files); two runs into the same new folder never both succeed; a run
stopped by a signal leaves nothing behind, and one killed outright leaves a temporary folder
that the next run sweeps away; bad output paths are refused before anything is computed,
with a message and no traceback.

The tests with several processes use real processes. A slow writing step is simulated by a
small script that wraps one writer so that it waits for a file the test creates; the test
waits for the script to say it is writing. Those waits have a generous deadline that only
guards against a hang; nothing here measures speed.
"""

from __future__ import annotations

import hashlib
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from assurance.cli import main
from assurance.errors import AssuranceInputError
from assurance.report.output_folder import MARKER, claim_output_folder

GOOD = """\
title = "Safety test design"
[endpoint]
sd = 10.0
analysis = "z"
[design_prior]
family = "normal"
mean = 4.0
sd = 2.0
[sizes]
list = [50, 100, 200]
[targets]
assurance = 0.6
"""

DEADLINE = 180.0  # seconds; only a guard against a hung process, never a speed check

#: Runs the command line with the sample-size writer made slow: after writing its file it
#: creates ``argv[1]`` ("I am writing") and waits until ``argv[2]`` exists.
SLOW_WRITER = """\
import pathlib, signal, sys, time
import assurance.report.output_folder as folder

# Ctrl-C as in a terminal, even when the tests were started from a shell that ignores it
# (a background job of a non-interactive shell does, and children inherit that)
signal.signal(signal.SIGINT, signal.default_int_handler)

real = folder.write_sample_sizes_csv


def slow(answers, path):
    real(answers, path)
    pathlib.Path(sys.argv[1]).write_text("writing", encoding="utf-8")
    go = pathlib.Path(sys.argv[2])
    while not go.exists():
        time.sleep(0.02)


folder.write_sample_sizes_csv = slow
from assurance.cli import main

sys.exit(main(sys.argv[3:]))
"""

#: Runs the command line and dies (no cleanup possible) right after the previous output has
#: been moved aside, before the new one takes its place.
DIES_IN_THE_SWAP = """\
import os, sys

real = os.rename


def rename(src, dst, *args, **kwargs):
    real(src, dst, *args, **kwargs)
    if os.path.basename(dst) == "old":
        os._exit(9)


os.rename = rename
from assurance.cli import main

sys.exit(main(sys.argv[1:]))
"""


def _digest(folder: Path) -> str:
    h = hashlib.sha256()
    for path in sorted(folder.rglob("*")):
        h.update(str(path.relative_to(folder)).encode())
        if path.is_file():
            h.update(path.read_bytes())
    return h.hexdigest()


def _hidden(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if p.name.startswith("."))


def _complete(out: Path) -> bool:
    listed = [line.rstrip("/") for line in (out / MARKER).read_text(encoding="utf-8")
              .splitlines() if line and not line.startswith("#")]
    return "memo.html" in listed and all((out / name).exists() for name in listed)


def _wait_for(path: Path, proc: subprocess.Popen) -> None:
    end = time.monotonic() + DEADLINE
    while not path.exists():
        if proc.poll() is not None:
            pytest.fail(f"the run ended before writing: {proc.communicate()}")
        if time.monotonic() > end:
            proc.kill()
            pytest.fail("the run never reached the writing step")
        time.sleep(0.02)


def _command(*argv: str) -> list[str]:
    return [sys.executable, "-m", "assurance.cli", *argv]


def _slow_run(tmp_path: Path, design: Path, out: Path, *extra: str):
    script = tmp_path / "slow.py"
    script.write_text(SLOW_WRITER, encoding="utf-8")
    ready, go = tmp_path / "ready.flag", tmp_path / "go.flag"
    proc = subprocess.Popen([sys.executable, str(script), str(ready), str(go), "plan",
                             str(design), "--out", str(out), "--quiet", *extra],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    _wait_for(ready, proc)
    return proc, go


@pytest.fixture
def design(tmp_path) -> Path:
    path = tmp_path / "design.toml"
    path.write_text(GOOD, encoding="utf-8")
    return path


@pytest.fixture
def no_computing(monkeypatch):
    """Fail if a plan is computed: the refusals below must come before any computing."""
    from assurance.planner import Plan

    def refuse(*args, **kwargs):
        raise AssertionError("a plan was computed before the output path was checked")

    monkeypatch.setattr(Plan, "from_file", refuse)


def _refused(capsys, argv: list[str], *words: str) -> str:
    code = main(argv)
    err = capsys.readouterr().err
    assert code == 2, err
    assert "Traceback" not in err
    for word in words:
        assert word in err, (word, err)
    return err


# ------------------------------------------------------------------------------------------
# 1. --overwrite replaces only a folder the package wrote, holding nothing else
# ------------------------------------------------------------------------------------------
def test_overwrite_never_replaces_the_design_files_folder(tmp_path, capsys, no_computing):
    project = tmp_path / "project"
    project.mkdir()
    design = project / "design.toml"
    design.write_text(GOOD, encoding="utf-8")
    (project / "notes.txt").write_text("two years of notes", encoding="utf-8")
    before = _digest(project)
    _refused(capsys, ["plan", str(design), "--out", str(project), "--overwrite"],
             "holds the design file", "never replaced", "Choose a new folder")
    assert _digest(project) == before
    assert _hidden(tmp_path) == []


def test_the_design_file_inside_an_output_folder_keeps_that_folder(tmp_path, capsys):
    # reading back the design.toml of an output folder, into that same folder: refused,
    # though the folder was written by the package
    out = tmp_path / "out"
    design = tmp_path / "design.toml"
    design.write_text(GOOD, encoding="utf-8")
    assert main(["plan", str(design), "--out", str(out), "--quiet"]) == 0
    before = _digest(out)
    _refused(capsys, ["plan", str(out / "design.toml"), "--out", str(out), "--overwrite"],
             "holds the design file")
    assert _digest(out) == before


def test_an_output_folder_inside_the_design_files_folder_is_fine(tmp_path, design):
    out = tmp_path / "plans" / "first"
    assert main(["plan", str(design), "--out", str(out), "--quiet"]) == 0
    assert _complete(out)
    assert design.read_text(encoding="utf-8") == GOOD


def test_overwrite_never_replaces_a_folder_without_the_marker(tmp_path, design, capsys,
                                                              no_computing):
    out = tmp_path / "results"
    out.mkdir()
    (out / "data.csv").write_text("precious", encoding="utf-8")
    _refused(capsys, ["plan", str(design), "--out", str(out), "--overwrite"],
             "was not written by assurance", MARKER)
    assert (out / "data.csv").read_text(encoding="utf-8") == "precious"


@pytest.mark.parametrize("added", ["notes.txt", "figures/my_drawing.png", "extra/"])
def test_overwrite_never_replaces_an_output_folder_holding_a_users_file(tmp_path, design,
                                                                        capsys, added):
    out = tmp_path / "out"
    assert main(["plan", str(design), "--out", str(out), "--quiet"]) == 0
    path = out / added
    if added.endswith("/"):
        path.mkdir()
    else:
        path.write_text("mine", encoding="utf-8")
    before = _digest(out)
    _refused(capsys, ["plan", str(design), "--out", str(out), "--overwrite"],
             "holds files assurance did not write", repr(added))
    assert _digest(out) == before
    assert _hidden(tmp_path) == []


def test_overwrite_never_replaces_a_symbolic_link(tmp_path, design, capsys, no_computing):
    target = tmp_path / "real"
    target.mkdir()
    (target / "kept.txt").write_text("kept", encoding="utf-8")
    link = tmp_path / "link"
    link.symlink_to(target, target_is_directory=True)
    _refused(capsys, ["plan", str(design), "--out", str(link), "--overwrite"],
             "symbolic link")
    assert link.is_symlink() and (target / "kept.txt").read_text(encoding="utf-8") == "kept"


def test_overwrite_replaces_a_clean_output_folder_and_lists_its_files(tmp_path, design):
    out = tmp_path / "out"
    assert main(["plan", str(design), "--out", str(out), "--quiet"]) == 0
    first = (out / MARKER).read_text(encoding="utf-8")
    assert first.splitlines()[0] == "# assurance output folder"
    assert "memo.html" in first.splitlines() and "figures/prior.png" in first.splitlines()
    (out / "results.csv").write_text("edited by hand", encoding="utf-8")
    assert main(["plan", str(design), "--out", str(out), "--quiet", "--overwrite"]) == 0
    assert (out / "results.csv").read_text(encoding="utf-8").startswith("n,")
    assert _complete(out)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["design.toml", "out"]


# ------------------------------------------------------------------------------------------
# 4. output paths are checked before anything is computed
# ------------------------------------------------------------------------------------------
def test_out_dot_with_overwrite_is_refused_as_the_current_folder(tmp_path, design, capsys,
                                                                 monkeypatch):
    # even when the current folder is a clean output folder of the package
    out = tmp_path / "out"
    assert main(["plan", str(design), "--out", str(out), "--quiet"]) == 0
    before = _digest(out)
    monkeypatch.chdir(out)
    from assurance.planner import Plan

    monkeypatch.setattr(Plan, "from_file", lambda *a, **k: pytest.fail("computed"))
    _refused(capsys, ["plan", str(design), "--out", ".", "--overwrite"],
             "'.'", "is the current folder")
    monkeypatch.chdir(out / "figures")
    _refused(capsys, ["plan", str(design), "--out", "..", "--overwrite"],
             "holds the current folder")
    assert _digest(out) == before


def test_an_empty_out_is_refused_instead_of_using_the_default(tmp_path, design, capsys,
                                                              monkeypatch, no_computing):
    monkeypatch.chdir(tmp_path)
    _refused(capsys, ["plan", str(design), "--out", ""], "--out", "must name a folder")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["design.toml"]


def test_an_out_path_through_a_file_is_refused(tmp_path, design, capsys, no_computing):
    somefile = tmp_path / "somefile"
    somefile.write_text("a file", encoding="utf-8")
    _refused(capsys, ["plan", str(design), "--out", str(somefile / "x")],
             "cannot be made", "is a file, not a folder")
    assert somefile.read_text(encoding="utf-8") == "a file"


def test_an_unwritable_output_folder_is_refused(tmp_path, design, capsys, no_computing,
                                                monkeypatch):
    locked = tmp_path / "locked"
    locked.mkdir()
    locked.chmod(0o555)
    try:
        if os.access(locked, os.W_OK):  # running as root: permissions do not apply
            real = os.access
            monkeypatch.setattr(os, "access", lambda p, mode, **kw: False if Path(p) == locked
                                else real(p, mode, **kw))
        _refused(capsys, ["plan", str(design), "--out", str(locked / "out")],
                 "cannot be written", "no permission to write", str(locked))
        assert list(locked.iterdir()) == []
    finally:
        locked.chmod(0o755)


def test_missing_parent_folders_are_made_and_removed_again_on_failure(tmp_path, capsys):
    bad = tmp_path / "bad.toml"
    bad.write_text(GOOD.replace("sd = 10.0", "sd = -1.0"), encoding="utf-8")
    _refused(capsys, ["plan", str(bad), "--out", str(tmp_path / "a" / "b" / "out")],
             "'endpoint.sd'")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["bad.toml"]


# ------------------------------------------------------------------------------------------
# 2. two runs into the same new folder
# ------------------------------------------------------------------------------------------
def test_a_second_run_into_a_folder_being_written_fails_and_the_first_completes(tmp_path,
                                                                               design):
    out = tmp_path / "out"
    first, go = _slow_run(tmp_path, design, out)
    try:
        for extra in ([], ["--overwrite"]):
            second = subprocess.run(_command("plan", str(design), "--out", str(out), "-q",
                                             *extra), capture_output=True, text=True)
            assert second.returncode == 2, second.stderr
            assert "is being written by another assurance run" in second.stderr
            assert f"process {first.pid}" in second.stderr
            assert "Traceback" not in second.stderr
    finally:
        go.write_text("go", encoding="utf-8")
        _, err = first.communicate(timeout=DEADLINE)
    assert first.returncode == 0, err
    assert _complete(out)
    assert _hidden(tmp_path) == []


def test_two_runs_started_together_never_both_succeed(tmp_path, design):
    out = tmp_path / "out"
    procs = [subprocess.Popen(_command("plan", str(design), "--out", str(out), "-q"),
                              stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
             for _ in range(2)]
    results = [(p.wait(timeout=DEADLINE), p.communicate()[1]) for p in procs]
    assert sorted(code for code, _ in results) == [0, 2], results
    loser = next(err for code, err in results if code == 2)
    assert "being written by another assurance run" in loser or "already exists" in loser
    assert "Traceback" not in loser
    assert _complete(out)
    assert _hidden(tmp_path) == []


def test_a_claim_in_this_process_blocks_a_second_claim(tmp_path):
    out = tmp_path / "out"
    with claim_output_folder(out):
        with pytest.raises(AssuranceInputError, match=f"process {os.getpid()}"):
            claim_output_folder(out)
        assert not out.exists()
    assert list(tmp_path.iterdir()) == []


# ------------------------------------------------------------------------------------------
# 3. runs stopped or killed while writing
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize(("signum", "name"), [(signal.SIGTERM, "SIGTERM"),
                                              (signal.SIGINT, "SIGINT")])
def test_a_run_stopped_while_writing_leaves_nothing_behind(tmp_path, design, signum, name):
    out = tmp_path / "out"
    proc, go = _slow_run(tmp_path, design, out)
    assert [n for n in _hidden(tmp_path) if n.endswith(".assurance-tmp")]  # mid-write
    proc.send_signal(signum)
    _, err = proc.communicate(timeout=DEADLINE)
    assert proc.returncode == 128 + signum, err
    assert f"stopped ({name})" in err and "Traceback" not in err
    assert not out.exists()
    assert _hidden(tmp_path) == []


def test_a_killed_runs_temporary_folder_is_swept_by_the_next_run(tmp_path, design):
    out = tmp_path / "out"
    proc, go = _slow_run(tmp_path, design, out)
    proc.kill()  # no chance to clean up
    proc.communicate(timeout=DEADLINE)
    left = [n for n in _hidden(tmp_path) if n.endswith(".assurance-tmp")]
    assert left, "the kill should have left the temporary folder"
    assert (tmp_path / left[0] / "owner").read_text(encoding="utf-8").count(
        f"pid = {proc.pid}") == 1
    # a hidden folder of the user's with a similar name is never touched
    mine = tmp_path / ".mine.assurance-tmp"
    mine.mkdir()
    (mine / "owner").write_text("my own file", encoding="utf-8")
    assert main(["plan", str(design), "--out", str(tmp_path / "other"), "--quiet"]) == 0
    assert _hidden(tmp_path) == [".mine.assurance-tmp"]
    assert (mine / "owner").read_text(encoding="utf-8") == "my own file"
    assert main(["plan", str(design), "--out", str(out), "--quiet"]) == 0  # free again
    assert _complete(out)


def test_a_run_killed_in_the_middle_of_the_swap_loses_nothing(tmp_path, design):
    out = tmp_path / "out"
    assert main(["plan", str(design), "--out", str(out), "--quiet"]) == 0
    before = _digest(out)
    script = tmp_path / "dies.py"
    script.write_text(DIES_IN_THE_SWAP, encoding="utf-8")
    proc = subprocess.run([sys.executable, str(script), "plan", str(design), "--out", str(out),
                           "--quiet", "--overwrite"], capture_output=True, text=True)
    assert proc.returncode == 9, proc.stderr
    assert not out.exists()  # the previous output is aside, in the temporary folder
    assert main(["plan", str(design), "--out", str(tmp_path / "other"), "--quiet"]) == 0
    assert _digest(out) == before  # put back by the next run into the same parent
    assert [n for n in _hidden(tmp_path) if n.endswith(".assurance-tmp")] == []


@pytest.mark.parametrize("name", [".out.assurance-tmp", ".assurance-output"])
def test_names_kept_for_the_packages_own_files_are_refused(tmp_path, design, capsys, name,
                                                           no_computing):
    _refused(capsys, ["plan", str(design), "--out", str(tmp_path / name)],
             "keeps for its own files")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["design.toml"]


def test_an_empty_folder_made_beforehand_is_used_with_overwrite(tmp_path, design, capsys):
    out = tmp_path / "results"
    out.mkdir()
    _refused(capsys, ["plan", str(design), "--out", str(out)], "already exists",
             "--overwrite")
    assert main(["plan", str(design), "--out", str(out), "--quiet", "--overwrite"]) == 0
    assert _complete(out)
