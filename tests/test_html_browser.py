"""The ``--html`` page in a real browser (Debian's chromium, headless): it loads from disk, offline, with
its audio players and figures in the rendered document. CI installs chromium (.ci/run); where it is
not installed the test is skipped with that reason."""

from __future__ import annotations

import shutil
import struct
import subprocess
from pathlib import Path

import pytest

from iqsift.jobs import extract_file

from .test_html_report import CAPTURE, PLAN, check_references

CHROMIUM = shutil.which("chromium")
# headless, offline, and with a throw-away profile: nothing from the network or a previous run
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync"]


def browse(page: Path, profile: Path, *extra: str) -> subprocess.CompletedProcess:
    """Run chromium once on the page; it exits by itself (a timeout kills it and fails the test)."""
    return subprocess.run([CHROMIUM, *FLAGS, f"--user-data-dir={profile}", *extra, page.resolve().as_uri()],
                          capture_output=True, text=True, timeout=60, check=True)


@pytest.mark.skipif(CHROMIUM is None, reason="chromium is not installed (apt-get install chromium; CI does)")
def test_page_renders_in_headless_chromium(tmp_path):
    plan = tmp_path / "plan.toml"
    plan.write_text(PLAN)
    result = extract_file(CAPTURE, plan, tmp_path / "out", html=True, duration="1s")
    page = Path(result.html or "")
    check_references(page)
    dom = browse(page, tmp_path / "profile1", "--dump-dom").stdout
    # the rendered document (after parsing, as the browser built it) keeps the players and the figures
    assert dom.count("<audio") == 2 and 'src="north_ground.wav"' in dom and 'src="yard-link.wav"' in dom
    assert dom.count("<img") == 3 and "Activity timeline" in dom
    shot = tmp_path / "shot.png"
    browse(page, tmp_path / "profile2", f"--screenshot={shot}", "--window-size=800,1000")
    data = shot.read_bytes()
    # PNG (ISO/IEC 15948): signature, then the IHDR chunk with width and height
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    assert struct.unpack(">II", data[16:24]) == (800, 1000)
