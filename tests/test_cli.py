"""Command line: promised files, no silent overwrite, clear messages for bad input."""

from __future__ import annotations

import csv
import hashlib
import math
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from assurance.cli import main
from assurance.design_file import read_design_file
from assurance.planning import evaluate

ROOT = Path(__file__).resolve().parents[1]
CASE = ROOT / "case_studies" / "knee_pain" / "design.toml"

PROMISED = [
    "memo.html",
    "results.csv",
    "results.nc",
    "sample_sizes.csv",
    "design.toml",
    "design_as_given.toml",
    "figures/prior.png",
    "figures/power_and_assurance.png",
    ".assurance-output",
]

GOOD = """\
title = "Test design"
[endpoint]
sd = 10.0
analysis = "z"
[success]
alpha = 0.025
[effect]
assumed = 4.0
relevant = 3.0
[design_prior]
family = "normal"
mean = 4.0
sd = 2.0
[sizes]
list = [50, 100, 200]
[targets]
assurance = 0.6
"""


def _tree_digest(folder: Path) -> str:
    h = hashlib.sha256()
    for path in sorted(folder.rglob("*")):
        h.update(str(path.relative_to(folder)).encode())
        if path.is_file():
            h.update(path.read_bytes())
    return h.hexdigest()


@pytest.fixture(scope="module")
def case_output(tmp_path_factory):
    out = tmp_path_factory.mktemp("case") / "plan"
    assert main(["plan", str(CASE), "--out", str(out), "--quiet"]) == 0
    return out


def test_plan_writes_every_promised_file(case_output):
    for name in PROMISED:
        path = case_output / name
        assert path.is_file(), name
        assert path.stat().st_size > 0, name
    assert (case_output / "design_as_given.toml").read_bytes() == CASE.read_bytes()
    assert not list(case_output.rglob("*.svg"))  # PNG only unless --svg
    # nothing half-written is left beside the folder
    leftovers = [p for p in case_output.parent.iterdir() if p.name.startswith(".")]
    assert leftovers == []


def test_results_files_hold_the_computed_numbers(case_output):
    import xarray as xr

    spec = read_design_file(CASE)
    with xr.open_dataset(case_output / "results.nc", engine="scipy") as saved:
        fresh = evaluate(spec.design, saved.n.values, seed=spec.seed)
        np.testing.assert_allclose(saved.assurance.values, fresh.assurance.values, rtol=1e-12)
        np.testing.assert_allclose(saved.power.values, fresh.power.values, rtol=1e-12)
        assert saved.attrs["package_version"]
    with open(case_output / "results.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert [int(r["n"]) for r in rows] == [int(v) for v in fresh.n.values]
    np.testing.assert_allclose([float(r["assurance"]) for r in rows], fresh.assurance.values,
                               rtol=1e-5)  # CSV keeps 6 significant digits
    with open(case_output / "sample_sizes.csv", newline="") as fh:
        targets = {r["quantity"]: r for r in csv.DictReader(fh)}
    assert set(targets) == set(spec.targets)


def test_existing_output_is_not_overwritten(case_output, capsys):
    before = _tree_digest(case_output)
    code = main(["plan", str(CASE), "--out", str(case_output), "--quiet"])
    err = capsys.readouterr().err
    assert code == 2
    assert "already exists" in err and "--overwrite" in err
    assert _tree_digest(case_output) == before


def test_svg_flag_adds_svg_figures(tmp_path):
    design = tmp_path / "d.toml"
    design.write_text(GOOD)
    out = tmp_path / "out"
    assert main(["plan", str(design), "--out", str(out), "--quiet", "--svg"]) == 0
    for name in ("prior", "power_and_assurance"):
        assert (out / "figures" / f"{name}.png").read_bytes()[:4] == b"\x89PNG"
        assert "</svg>" in (out / "figures" / f"{name}.svg").read_text(encoding="utf-8")
    listed = (out / ".assurance-output").read_text(encoding="utf-8")
    assert "figures/prior.svg" in listed.splitlines()


def test_overwrite_replaces_the_folder(tmp_path):
    design = tmp_path / "d.toml"
    design.write_text(GOOD)
    out = tmp_path / "out"
    assert main(["plan", str(design), "--out", str(out), "--quiet"]) == 0
    (out / "memo.html").write_text("stale")
    assert main(["plan", str(design), "--out", str(out), "--quiet", "--overwrite"]) == 0
    assert (out / "memo.html").read_text() != "stale"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["d.toml", "out"]


BAD_CASES = [
    # (replacement in GOOD, words the message must contain)
    (("sd = 10.0", "sd = -1.0"), ["'endpoint.sd'", "-1.0", "> 0"]),
    (("sd = 10.0", "sd = nan"), ["'endpoint.sd'", "finite", "nan"]),
    (("sd = 10.0", "sd = inf"), ["'endpoint.sd'", "finite", "inf"]),
    (("alpha = 0.025", "alpha = 0.7"), ["'success.alpha'", "0.7", "< 0.5"]),
    (("analysis = \"z\"", "analysis = \"z\"\nallocation = 0"), ["'endpoint.allocation'", "0"]),
    (("[effect]", "[effect]\nasumed = 3"), ["asumed", "Did you mean 'assumed'"]),
    (("family = \"normal\"", "family = \"normall\""), ["normall", "Did you mean 'normal'"]),
    (("list = [50, 100, 200]", "list = [1, 100]"), ["[sizes]", ">= 2"]),
    (("assurance = 0.6", "assurance = 1.2"), ["targets.assurance", "1.2"]),
    (("relevant = 3.0", "relevant = 30.0"), ["relevant", "30"]),
    (
        ("family = \"normal\"\nmean = 4.0\nsd = 2.0",
         "family = \"mixture\"\nparts = [{weight = 0.5, family = \"point_mass\", value = 0.0},"
         " {weight = 0.6, family = \"normal\", mean = 4.0, sd = 2.0}]"),
        ["weights of 'design_prior.parts'", "sum to 1"],
    ),
    (("[sizes]", "[sd_prior]\nfamily = \"normal\"\nmean = 1.0\nsd = 1.0\n[sizes]"),
     ["sd_prior", "sigma > 0"]),
    (("title = \"Test design\"", "title = \"Test design\"\ncolour = \"red\""),
     ["unknown table or key 'colour'"]),
    (("[design_prior]", "[design_prior"), ["not valid TOML"]),
]


@pytest.mark.parametrize(("change", "words"), BAD_CASES)
def test_bad_design_gives_a_clear_message_and_no_output(tmp_path, capsys, change, words):
    design = tmp_path / "bad.toml"
    old, new = change
    assert old in GOOD
    design.write_text(GOOD.replace(old, new, 1))
    out = tmp_path / "out"
    code = main(["plan", str(design), "--out", str(out), "--quiet"])
    err = capsys.readouterr().err
    assert code == 2
    for word in words:
        assert word in err, (word, err)
    assert "Traceback" not in err
    assert not out.exists()


def test_missing_design_file(tmp_path, capsys):
    code = main(["check", str(tmp_path / "nope.toml")])
    err = capsys.readouterr().err
    assert code == 2
    assert "not found" in err and "nope.toml" in err


def test_check_accepts_the_case_study(capsys):
    assert main(["check", str(CASE)]) == 0
    assert "ok" in capsys.readouterr().out


def test_real_process_exits_2_without_traceback(tmp_path):
    design = tmp_path / "bad.toml"
    design.write_text(GOOD.replace("sd = 10.0", "sd = 0"))
    proc = subprocess.run([sys.executable, "-m", "assurance.cli", "plan", str(design), "--out",
                           str(tmp_path / "o")], capture_output=True, text=True)
    assert proc.returncode == 2
    assert "Traceback" not in proc.stderr
    assert "'endpoint.sd'" in proc.stderr


def test_console_command_leaves_at_once_with_everything_written(tmp_path):
    # run() ends the process with os._exit after main returns: the exit status, the whole
    # text on a pipe and every output file must be there as with a normal exit
    design = tmp_path / "d.toml"
    design.write_text(GOOD)
    out = tmp_path / "out"
    code = ("import sys\nfrom assurance.cli import run\n"
            "print('before', flush=False)\nrun(sys.argv[1:])\nprint('never here')\n")
    proc = subprocess.run([sys.executable, "-c", code, "plan", str(design), "--out",
                           str(out)], capture_output=True, text=True)
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.startswith("before") and "never here" not in proc.stdout
    assert f"Written to {out}" in proc.stdout  # the summary, flushed before leaving
    written = {p.relative_to(out).as_posix() for p in out.rglob("*")}
    assert {"memo.html", "results.csv", "results.nc", "figures/prior.png"} <= written
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".")]  # no leftovers
    bad = subprocess.run([sys.executable, "-c", code, "check", str(tmp_path / "no.toml")],
                         capture_output=True, text=True)
    assert bad.returncode == 2 and "not found" in bad.stderr


def test_help_imports_nothing_heavy():
    code = ("import sys, assurance.cli as c\n"
            "try:\n    c.main(['--help'])\nexcept SystemExit:\n    pass\n"
            "heavy = [m for m in ('numpy', 'scipy', 'xarray', 'matplotlib', 'pymc')"
            " if m in sys.modules]\n"
            "print('heavy:' + ','.join(heavy))")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          check=True)
    assert proc.stdout.strip().splitlines()[-1] == "heavy:"


def test_monte_carlo_design_runs_and_reports_standard_errors(tmp_path):
    design = tmp_path / "mc.toml"
    # a Student t effect prior with a prior on the SD is simulated (a normal one is not)
    text = GOOD.replace("family = \"normal\"\nmean = 4.0\nsd = 2.0",
                        "family = \"student_t\"\ndf = 5.0\nlocation = 4.0\nscale = 2.0")
    design.write_text(text.replace("[sizes]", "[sd_prior]\nfamily = \"scaled_inv_chi_square\"\n"
                                   "df = 30\nscale = 10.0\n[monte_carlo]\ndraws = 2000\n"
                                   "seed = 7\n[sizes]"))
    out = tmp_path / "out"
    assert main(["plan", str(design), "--out", str(out), "--quiet"]) == 0
    with open(out / "results.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert all(float(r["assurance_mcse"]) > 0 for r in rows)


def test_precision_table_adds_widths_figure_and_memo_section(tmp_path):
    # known SD, flat analysis prior: the posterior interval is the z interval, so the width
    # target is met at n = (2 z sigma sqrt(4) / l)^2 in total (Joseph & Belisle 1997, known
    # sigma case; common practice for the z interval)
    design = tmp_path / "p.toml"
    design.write_text(GOOD + "[precision]\nlength = 5.0\ncriteria = [\"ALC\", \"WOC\"]\n")
    out = tmp_path / "out"
    assert main(["plan", str(design), "--out", str(out), "--quiet"]) == 0
    with open(out / "results.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    for r in rows:
        n = int(r["n"])
        expected = 2 * 1.959963985 * 10.0 * math.sqrt(1 / (n // 2) + 1 / (n - n // 2))
        assert float(r["width_mean"]) == pytest.approx(expected, rel=1e-5)
    assert (out / "figures" / "interval_width.png").stat().st_size > 0
    memo = (out / "memo.html").read_text()
    assert "How precisely the effect will be known" in memo
    needed = math.ceil((2 * 1.959963985 * 10.0 * 2 / 5.0) ** 2)
    text = re.sub(r"\s+", " ", re.sub(r"<[^>]+>", " ", memo))
    found = re.search(r"average length \(ALC\) .*? (\d+) \(\d+ / \d+\)", text)
    assert found is not None and int(found.group(1)) in (needed, needed + 1)


def test_bad_precision_table(tmp_path, capsys):
    design = tmp_path / "p.toml"
    design.write_text(GOOD + "[precision]\nlength = -1.0\n")
    assert main(["plan", str(design), "--out", str(tmp_path / "o"), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert "'precision.length'" in err and "-1.0" in err


def test_warnings_print_as_one_plain_line_without_source(tmp_path):
    # a warning raised while planning (here by a wrapped step) reaches the user as one line,
    # never as Python's "file:line: category" plus the source line
    design = tmp_path / "d.toml"
    design.write_text(GOOD)
    script = tmp_path / "warn.py"
    script.write_text(
        "import sys, warnings\n"
        "from assurance.planner import Plan\n"
        "real = Plan.from_spec.__func__\n"
        "def noisy(cls, *args, **kwargs):\n"
        "    warnings.warn('first part\\n  second part', UserWarning)  # SOURCE-LINE-MARK\n"
        "    return real(cls, *args, **kwargs)\n"
        "Plan.from_spec = classmethod(noisy)\n"
        "from assurance.cli import main\n"
        "sys.exit(main(sys.argv[1:]))\n", encoding="utf-8")
    proc = subprocess.run([sys.executable, str(script), "plan", str(design), "--out",
                           str(tmp_path / "out"), "--quiet"], capture_output=True, text=True)
    assert proc.returncode == 0, proc.stderr
    assert "assurance: warning: first part second part" in proc.stderr.splitlines()
    assert "SOURCE-LINE-MARK" not in proc.stderr and "UserWarning" not in proc.stderr
    assert "warn.py" not in proc.stderr


def test_control_characters_never_reach_the_terminal_raw(tmp_path, capsys):
    # TOML allows escaped control characters in strings; whether the design-file reader
    # accepts such a title or refuses it, nothing raw may be printed
    design = tmp_path / "d.toml"
    design.write_text(GOOD.replace('title = "Test design"',
                                   'title = "Red \\u001b[31m alert\\u0007 \\u202e end"'))
    out = tmp_path / "out"
    for argv in (["check", str(design)], ["plan", str(design), "--out", str(out)]):
        code = main(argv)
        captured = capsys.readouterr()
        text = captured.out + captured.err
        assert code in (0, 2)
        for raw in ("\x1b", "\x07", "\u202e"):
            assert raw not in text, (argv[0], text)
        if code == 0:
            assert "\\x1b[31m" in text
    if out.exists():
        memo = (out / "memo.html").read_text(encoding="utf-8")
        assert "\x1b" not in memo and "\x07" not in memo and "\u202e" not in memo
        assert "Red \\x1b[31m alert\\x07" in memo
