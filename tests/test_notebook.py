"""The test-bench notebook executes (nbclient), so it cannot rot."""

from __future__ import annotations

import json
import sys
from pathlib import Path

import pytest

NOTEBOOK = Path(__file__).resolve().parent.parent / "notebooks" / "test_bench.ipynb"


@pytest.mark.slow
def test_notebook_executes(tmp_path, monkeypatch):
    nbformat = pytest.importorskip("nbformat")
    nbclient = pytest.importorskip("nbclient")
    # a kernel spec that runs this very interpreter, whatever "python3" means elsewhere on the machine
    spec_dir = tmp_path / "kernels" / "iqsift-test"
    spec_dir.mkdir(parents=True)
    (spec_dir / "kernel.json").write_text(json.dumps({
        "argv": [sys.executable, "-m", "ipykernel_launcher", "-f", "{connection_file}"],
        "display_name": "iqsift test", "language": "python"}))
    monkeypatch.setenv("JUPYTER_PATH", str(tmp_path))
    nb = nbformat.read(NOTEBOOK, as_version=4)
    work = tmp_path / "run"
    work.mkdir()
    (work / "sample_captures").symlink_to(NOTEBOOK.parent.parent / "sample_captures")
    client = nbclient.NotebookClient(nb, kernel_name="iqsift-test", timeout=300,
                                     resources={"metadata": {"path": str(work)}})
    client.execute()
    outputs = "".join(o.get("text", "") for c in nb.cells if c.cell_type == "code" for o in c.get("outputs", []))
    assert "all checks passed" in outputs
