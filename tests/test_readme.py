"""The README's library examples run as written (from a folder holding the sample captures)."""

from __future__ import annotations

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def test_every_python_example_in_the_readme_runs(tmp_path, monkeypatch):
    blocks = re.findall(r"```python\n(.*?)```", (ROOT / "README.md").read_text(encoding="utf-8"), flags=re.S)
    assert len(blocks) >= 2
    (tmp_path / "sample_captures").symlink_to(ROOT / "sample_captures")
    monkeypatch.chdir(tmp_path)
    for code in blocks:
        exec(compile(code, "README.md", "exec"), {"__name__": "readme_example"})
    assert (tmp_path / "out" / "report.json").is_file()
