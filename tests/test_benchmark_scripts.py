"""Every benchmark script still starts: its imports resolve and its options parse.

The benchmarks are not run by the suite (they are measurements, not tests), so a
name moved inside faultfind could break one unnoticed until someone needs its
figures.  ``--help`` imports the whole script and exits 0 without measuring.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
SCRIPTS = sorted(p for p in (ROOT / "benchmarks").glob("*.py")
                 if "argparse" in p.read_text(encoding="utf-8"))


def test_the_benchmark_scripts_are_found():
    assert len(SCRIPTS) >= 7, SCRIPTS


@pytest.mark.parametrize("script", SCRIPTS, ids=lambda p: p.name)
def test_benchmark_script_starts(script):
    p = subprocess.run([sys.executable, str(script), "--help"], cwd=ROOT,
                       capture_output=True, text=True, timeout=120)
    assert p.returncode == 0, p.stderr
    assert "usage:" in p.stdout
