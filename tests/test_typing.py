"""The public API is typed: ``mypy src/`` (PEP 484 checks, configured in pyproject.toml) stays clean.

mypy is in the test extra, so this runs wherever the suite does.
"""

import subprocess
import sys
from pathlib import Path

SRC = Path(__file__).resolve().parents[1] / "src"


def test_mypy_reports_no_errors(tmp_path):
    result = subprocess.run(
        [sys.executable, "-m", "mypy", "--cache-dir", str(tmp_path / "cache"), str(SRC)],
        capture_output=True, text=True, cwd=SRC.parent,
    )
    assert result.returncode == 0, result.stdout[-4000:] + result.stderr[-2000:]
    assert (SRC / "iqsift" / "py.typed").is_file()
