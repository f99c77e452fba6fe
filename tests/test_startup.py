"""Start-up: ``import iqsift``, ``import iqsift.cli`` and ``iqsift --help`` load no numerical library.

Checked in a fresh interpreter (``sys.modules`` of a subprocess), since this test process has long
imported everything.
"""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

import iqsift

HEAVY = ("numpy", "scipy", "scipy.signal", "matplotlib", "soundfile", "iqsift.dsp", "iqsift.receiver",
         "iqsift.jobs", "iqsift.measure", "iqsift.survey", "iqsift.spectra")


def loaded_after(code: str) -> list[str]:
    """The HEAVY modules a fresh interpreter holds after running ``code``."""
    probe = f"{code}\nimport json, sys\nprint(json.dumps([m for m in {HEAVY!r} if m in sys.modules]))"
    result = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True)
    return json.loads(result.stdout.splitlines()[-1])


@pytest.mark.parametrize("code", [
    "import iqsift",
    "import iqsift.cli",
    "from iqsift.cli import main; main(['--help'])",
    "from iqsift.cli import main; main(['demod', '--help'])",
    "from iqsift.cli import main; main(['--version'])",
])
def test_start_up_loads_nothing_heavy(code):
    assert loaded_after(code) == []


def test_help_by_the_program():
    result = subprocess.run([sys.executable, "-m", "iqsift", "--help"], capture_output=True, text=True)
    assert result.returncode == 0 and "demod" in result.stdout and result.stderr == ""


def test_public_names_are_served_on_first_use():
    for name in iqsift.__all__:
        assert getattr(iqsift, name) is not None, name
    from iqsift.extractor import Extractor
    from iqsift.spectra import Spectrum

    assert iqsift.Extractor is Extractor and iqsift.Spectrum is Spectrum
    assert {"Extractor", "Spectrum", "Receiver", "open_capture", "__version__"} <= set(iqsift.__all__)
    assert set(iqsift.__all__) <= set(dir(iqsift))
    with pytest.raises(AttributeError, match="no attribute 'nonsense'"):
        iqsift.nonsense  # noqa: B018
    assert "Extractor" in loaded_public_names("from iqsift import Extractor, Spectrum")


def loaded_public_names(code: str) -> list[str]:
    """Names a fresh interpreter has put in the iqsift namespace after ``code`` (from-imports resolve them)."""
    probe = f"{code}\nimport iqsift\nprint(' '.join(n for n in iqsift.__all__ if n in vars(iqsift)))"
    result = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True)
    return result.stdout.split()


def test_survey_threshold_default_shown_is_the_one_used():
    from iqsift.cli.survey_cmd import SURVEY_THRESHOLD_DB
    from iqsift.survey import DEFAULT_THRESHOLD_DB

    assert SURVEY_THRESHOLD_DB == DEFAULT_THRESHOLD_DB
