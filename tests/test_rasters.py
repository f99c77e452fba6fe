"""Tests for iqsift.rasters: aeronautical VHF channel names and AM broadcast rasters.

Sources
- ICAO Annex 10, Volume V, chapter 4: the band 117.975-137 MHz, 25 kHz and 8.33 kHz
  (25/3 kHz) channel spacing. The name -> frequency pairing (B, B+5, B+10, B+15 kHz
  names -> B, B+8.333, B+16.667 kHz; names ending 20/45/70/95 unused) is from
  memory, as REFERENCES.md says: it could not be read in the Annex's own table with
  the documents at hand. Six-digit names ("118.005") follow Annex 10 Volume II,
  Amendment 80 (confirmed in a EUROCONTROL notice: 118.005, 118.025, 118.100).
- AM broadcast: Geneva 1975 plan, ITU Regions 1 and 3, carriers on multiples of
  9 kHz, 531-1602 kHz in 526.5-1606.5 kHz; Region 2, multiples of 10 kHz,
  530-1700 kHz (memory).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from iqsift.errors import ParameterError
from iqsift.rasters import (
    AERO_BAND_HZ,
    RASTERS,
    aero_channel,
    aero_channel_frequency,
    aero_channel_name,
    aero_channel_names,
    parse_raster,
    raster_frequencies,
    snap_to_raster,
)

STEP_833 = 25_000.0 / 3.0


@pytest.mark.parametrize(
    ("name", "freq_hz", "spacing"),
    [
        # ICAO 8.33 kHz naming (memory, REFERENCES.md worked examples).
        ("118.000", 118.000e6, 25_000.0),
        ("118.005", 118.000e6, STEP_833),
        ("118.010", 118.000e6 + 25_000.0 / 3.0, STEP_833),  # 118.0083 MHz
        ("118.015", 118.000e6 + 50_000.0 / 3.0, STEP_833),  # 118.0167 MHz
        ("118.025", 118.025e6, 25_000.0),
        ("118.030", 118.025e6, STEP_833),
        ("121.500", 121.500e6, 25_000.0),
        ("136.975", 136.975e6, 25_000.0),
        ("136.990", 136.975e6 + 50_000.0 / 3.0, STEP_833),
    ],
)
def test_worked_examples(name: str, freq_hz: float, spacing: float) -> None:
    channel = aero_channel(name)
    assert channel.frequency_hz == pytest.approx(freq_hz, abs=1e-6)
    assert channel.spacing_hz == pytest.approx(spacing)
    assert channel.name == name
    assert aero_channel_frequency(name) == channel.frequency_hz


def test_rounded_values_of_the_worked_examples() -> None:
    # REFERENCES.md quotes them to 0.1 kHz: 118.0083 and 118.0167 MHz.
    assert round(aero_channel_frequency("118.010") / 1e6, 4) == 118.0083
    assert round(aero_channel_frequency("118.015") / 1e6, 4) == 118.0167


def test_name_forms() -> None:
    assert aero_channel("121.5").name == "121.500"
    assert aero_channel(118.01).name == "118.010"  # float MHz
    assert aero_channel(" 118.010 ").frequency_hz == aero_channel("118.010").frequency_hz


@pytest.mark.parametrize("base", ["118.000", "121.500", "127.350", "136.975", "131.825"])
def test_names_ending_20_45_70_95_are_unused(base: str) -> None:
    # ICAO 8.33 kHz naming (memory): B + 20 kHz is not a channel name.
    khz = int(round(float(base) * 1000)) + 20
    name = f"{khz // 1000}.{khz % 1000:03d}"
    assert name[-2:] in ("20", "45", "70", "95")
    with pytest.raises(ParameterError, match="not used"):
        aero_channel(name)


@pytest.mark.parametrize(
    "name",
    ["118.001", "118.012", "118.0083", "117.975", "117.990", "137.000", "137.005", "99.000", "abc", "", True, None, float("nan")],
)
def test_bad_names(name: object) -> None:
    with pytest.raises(ParameterError) as info:
        aero_channel(name)  # type: ignore[arg-type]
    assert "\n" not in str(info.value)


def test_whole_band_tables() -> None:
    names_25 = aero_channel_names("25k")
    names_833 = aero_channel_names("8.33k")
    # 118.000-136.975 MHz at 25 kHz: 760 channels; three 8.33 kHz channels each: 2280 (memory).
    assert len(names_25) == 760 and len(names_833) == 2280
    f25 = np.array([aero_channel_frequency(n) for n in names_25])
    f833 = np.array([aero_channel_frequency(n) for n in names_833])
    # 8.33 kHz channels are 25/3 kHz apart, strictly ascending, all inside 117.975-137 MHz.
    assert np.allclose(np.diff(f833), STEP_833, rtol=0, atol=1e-6)
    assert f833[0] == 118.0e6 and f833[-1] < AERO_BAND_HZ[1]
    assert np.all(f25 >= AERO_BAND_HZ[0]) and np.all(f25 <= AERO_BAND_HZ[1])
    # The 25 kHz channel B shares its carrier with the 8.33 kHz channel named B + 5 kHz.
    assert np.array_equal(f25, f833[::3])
    # The generic 8.33k raster holds exactly these carriers.
    grid = raster_frequencies("8.33k", 118e6, 136.992e6)
    assert np.allclose(grid, f833, rtol=0, atol=1e-6)


@settings(max_examples=400, deadline=None)
@given(st.integers(0, 759), st.sampled_from([0, 5, 10, 15]))
def test_name_frequency_name_round_trip(base_index: int, step_khz: int) -> None:
    khz = 118_000 + 25 * base_index + step_khz
    name = f"{khz // 1000}.{khz % 1000:03d}"
    spacing = "25k" if step_khz == 0 else "8.33k"
    freq = aero_channel_frequency(name)
    assert aero_channel_name(freq, spacing) == name


@settings(max_examples=300, deadline=None)
@given(st.integers(0, 2279), st.floats(-999.0, 999.0))
def test_naming_tolerates_small_tuning_errors(index: int, error_hz: float) -> None:
    name = aero_channel_names("8.33k")[index]
    assert aero_channel_name(aero_channel_frequency(name) + error_hz) == name


def test_aero_channel_name_examples_and_errors() -> None:
    assert aero_channel_name(118.0e6) == "118.005"  # the 8.33 kHz name of 118.0000 MHz
    assert aero_channel_name(118.0e6, spacing="25k") == "118.000"
    assert aero_channel_name("118.0083M") == "118.010"  # 16.7 Hz from 118.008333 MHz
    assert aero_channel_name("118.025M", spacing="8.33k") == "118.030"
    with pytest.raises(ParameterError, match="tolerance"):
        aero_channel_name(118.004e6)  # 4 kHz off the 8.33 kHz raster
    with pytest.raises(ParameterError, match="tolerance"):
        aero_channel_name(118.0083e6, spacing="25k", tolerance_hz=1000)
    with pytest.raises(ParameterError, match="outside"):
        aero_channel_name(117.975e6)
    with pytest.raises(ParameterError, match="outside"):
        aero_channel_name(137.0e6, spacing="25k")
    with pytest.raises(ParameterError):
        aero_channel_name(118.0e6, spacing="9k")
    with pytest.raises(ParameterError):
        aero_channel_name(118.0e6, tolerance_hz=-1)


def test_am_broadcast_region_1_and_3() -> None:
    # Geneva 1975 plan (ITU Regions 1 and 3): carriers on multiples of 9 kHz, 531-1602 kHz,
    # in the band 526.5-1606.5 kHz: (1602 - 531) / 9 + 1 = 120 carriers.
    carriers = raster_frequencies("9k", 526.5e3, 1606.5e3)
    assert len(carriers) == 120
    assert carriers[0] == 531e3 and carriers[-1] == 1602e3
    assert np.all(np.mod(carriers, 9e3) == 0)


def test_am_broadcast_region_2() -> None:
    # Region 2: multiples of 10 kHz, 530-1700 kHz (memory): 118 carriers.
    carriers = raster_frequencies("10k", "530k", "1700k")
    assert len(carriers) == 118
    assert carriers[0] == 530e3 and carriers[-1] == 1700e3


def test_snap_examples() -> None:
    assert snap_to_raster(1000e3, "9k") == 999e3
    assert snap_to_raster("1004.6k", "9k") == 1008e3
    assert snap_to_raster(1004e3, "10k") == 1000e3
    assert snap_to_raster(118.012e6, "8.33k") == pytest.approx(118.0e6 + 25e3 / 3, abs=1e-6)
    assert snap_to_raster(127.3624e6, "25k") == 127.35e6
    with pytest.raises(ParameterError, match="more than"):
        snap_to_raster(1004.6e3, "9k", max_offset_hz=1000)
    assert snap_to_raster(1004.6e3, "9k", max_offset_hz=5000) == 1008e3


@settings(max_examples=300, deadline=None)
@given(st.sampled_from(sorted(RASTERS)), st.floats(1e5, 3e9))
def test_snap_is_nearest_and_idempotent(name: str, freq: float) -> None:
    raster = RASTERS[name]
    snapped = snap_to_raster(freq, name)
    assert abs(snapped - freq) <= raster.step_hz / 2 * (1 + 1e-9)
    assert snap_to_raster(snapped, name) == pytest.approx(snapped, abs=1e-6)
    # A grid point: a whole number of steps from the anchor.
    steps = (snapped - raster.anchor_hz) / raster.step_hz
    assert abs(steps - round(steps)) < 1e-6


def test_parse_raster() -> None:
    assert parse_raster("25k").step_hz == 25_000.0
    assert parse_raster("8.33 kHz").step_hz == pytest.approx(STEP_833)
    assert parse_raster("9K").step_hz == 9_000.0
    assert parse_raster("10khz").step_hz == 10_000.0
    assert parse_raster(RASTERS["9k"]) is RASTERS["9k"]
    for bad in ["12.5k", "8.3k", "8k33", "", "9", None, 9000]:
        with pytest.raises(ParameterError):
            parse_raster(bad)  # type: ignore[arg-type]


def test_raster_frequencies_edges_and_errors() -> None:
    assert raster_frequencies("25k", 118.0e6, 118.0e6).tolist() == [118.0e6]
    assert raster_frequencies("25k", 118.001e6, 118.024e6).size == 0
    assert raster_frequencies("8.33k", 118e6, 118.0166667e6).size == 3
    with pytest.raises(ParameterError):
        raster_frequencies("25k", 2e6, 1e6)
    with pytest.raises(ParameterError, match="limit"):
        raster_frequencies("9k", 0, 1e12)
    with pytest.raises(ParameterError):
        raster_frequencies("25k", "abc", 1e6)


def test_snap_tolerance_and_classes() -> None:
    # Snapping rule (module notes of iqsift.rasters): A3E carriers only, within 1 kHz of a grid point.
    assert all(r.snap_tolerance_hz == 1000.0 and r.classes == ("A3E",) for r in RASTERS.values())
    r25 = RASTERS["25k"]
    assert r25.snap_error(124.025037e6, "A3E") is None
    assert r25.snap_error(124.1747e6, "A3E") is None  # 300 Hz off tune
    assert "tolerance" in (r25.snap_error(124.0918e6, "A3E") or "")  # an 8.33 kHz channel, 8.2 kHz away
    assert "not J3E" in (RASTERS["9k"].snap_error(999e3, "J3E") or "")  # SSB never on an AM raster
    assert "tolerance" in (RASTERS["9k"].snap_error(7.185e6, "A3E") or "")  # 3 kHz off the 9 kHz grid
    assert RASTERS["8.33k"].snap_error(118.0083e6, "A3E") is None


def test_two_carriers_never_share_a_grid_point() -> None:
    import warnings

    from iqsift.errors import IqsiftWarning
    from iqsift.survey.results import DetectedEmission
    from iqsift.survey.snapping import snap_emissions

    def emission(index: int, freq_hz: float) -> DetectedEmission:
        return DetectedEmission(index, freq_hz, 0.0, "grandke-fine", "A3E", None, "envelope", "high", "", -40.0,
                                -40.0, 40.0, -40.0, freq_hz - 3e3, freq_hz + 3e3, 5e3, freq_hz - 2.5e3,
                                freq_hz + 2.5e3, 5e3, 6e3, "6K00A3E")

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        a, b = snap_emissions([emission(1, 127.3496e6), emission(2, 127.3502e6)], RASTERS["25k"])
    assert a.raster_frequency_hz is None and "taken by the nearer emission 2" in (a.raster_reason or "")
    assert b.raster_frequency_hz == 127.35e6 and b.channel_name == "127.350"
    assert [w.category for w in caught] == [IqsiftWarning]
