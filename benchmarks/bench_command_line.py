"""Wall time of ``assurance plan`` on the closed-form case studies, against a limit.

The limit, measured in the same run on the same machine, is the bare start of Python plus
``import numpy``: no command that computes anything can start faster. Each row gives the
median wall time of the whole command (reading the design file, computing, writing the
folder with its PNG figures and memo), the limit, their ratio and whether the target is
met. The target (from the hardening issue): a closed-form plan in under 1.5 s; the exact
binary plan (``response_rate``) is shown against the same line. One more row shows a plan
with ``--svg`` for comparison (SVG figures are written on request only). The command is the
installed ``assurance`` script, as a user runs it, with the package's bytecode compiled
first (as a user's first run leaves it; this machine may forbid writing it on import).

Run with ``python benchmarks/bench_command_line.py`` or through ``benchmarks/run.py``.
"""

from __future__ import annotations

import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
TARGET_SECONDS = 1.5
CASES = ("knee_pain", "event_driven", "weekly_injection", "phase2_to_phase3", "response_rate")


def wall(cmd: list[str], repeat: int) -> float:
    """Median wall time in seconds of ``repeat`` runs of ``cmd`` (each must succeed)."""
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        subprocess.run(cmd, check=True, capture_output=True)
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def main() -> None:
    python = sys.executable
    script = Path(python).with_name("assurance")
    command = [str(script)] if script.exists() else [python, "-m", "assurance.cli"]
    subprocess.run([python, "-m", "compileall", "-q", str(ROOT / "assurance")], check=True)
    limit = wall([python, "-c", "import numpy"], repeat=7)
    print(f"limit: Python start-up + import numpy {limit:.3f} s wall (median of 7)")
    runs = [(case, []) for case in CASES] + [(CASES[0], ["--svg"])]
    with tempfile.TemporaryDirectory() as tmp:
        for k, (case, extra) in enumerate(runs):
            design = ROOT / "case_studies" / case / "design.toml"
            times = []
            for i in range(3):  # a new folder each time: no --overwrite, nothing swept
                out = Path(tmp) / f"{case}-{k}-{i}"
                start = time.perf_counter()
                subprocess.run([*command, "plan", str(design), "--out",
                                str(out), "--quiet", *extra], check=True, capture_output=True)
                times.append(time.perf_counter() - start)
            took = statistics.median(times)
            label = f"assurance plan {case}" + (" " + " ".join(extra) if extra else "")
            verdict = ("met" if took < TARGET_SECONDS else "not met") if not extra \
                else "for comparison"
            print(f"{label:<36} {took:6.2f} s wall (median of 3) | limit {limit:.3f} s | "
                  f"ratio {took / limit:5.1f}x | target < {TARGET_SECONDS:g} s: {verdict}")


if __name__ == "__main__":
    main()
