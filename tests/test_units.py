"""Parsing of frequencies and times (SI prefixes per BIPM, The International System of Units, 9th ed., table 7)."""

from __future__ import annotations

import pytest
from hypothesis import given
from hypothesis import strategies as st

from iqsift.errors import ParameterError
from iqsift.units import TimeSpec, parse_frequency, parse_positive_hz, parse_time


@pytest.mark.parametrize("text,hz", [
    ("127.35M", 127.35e6), ("8.33k", 8330.0), ("2.4e6", 2.4e6), ("6 kHz", 6000.0), ("1.2GHz", 1.2e9),
    ("-25k", -25000.0), ("118.275 MHz", 118.275e6), (48000, 48000.0), ("12_500", 12500.0),
])
def test_parse_frequency(text, hz):
    assert parse_frequency(text) == pytest.approx(hz, rel=1e-15)


@pytest.mark.parametrize("text", ["", "abc", "12q", "1.2.3M", "127.35m", "nan", "inf", True])
def test_parse_frequency_rejects(text):
    with pytest.raises(ParameterError):
        parse_frequency(text, "--freq")


def test_positive_hz_rejects_zero_and_negative():
    for bad in ("0", "-6k"):
        with pytest.raises(ParameterError, match="--bandwidth"):
            parse_positive_hz(bad, "--bandwidth")


@given(st.floats(min_value=-1e10, max_value=1e10, allow_nan=False))
def test_parse_frequency_round_trips_repr(value):
    assert parse_frequency(repr(value)) == value


def test_parse_time():
    assert parse_time("250ms").to_samples(48000) == 12000
    assert parse_time("1.5").to_samples(1000) == 1500
    assert parse_time("48000sa").to_samples(1e6) == 48000
    assert parse_time(TimeSpec(samples=5)).to_samples(10) == 5
    with pytest.raises(ParameterError):
        parse_time("-1s")
