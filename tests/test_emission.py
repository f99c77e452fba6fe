"""Tests for iqsift.emission: ITU emission designators and necessary bandwidth.

Sources
- ITU Radio Regulations, Appendix 1 ("Classification of emissions and necessary
  bandwidths"), Section I §2: bandwidth code rules and the example table. Read in
  the ITU's own HTML copy of the Appendix (life.itu.int/radioclub/rr/ap01.htm),
  which also lists 0.002 Hz = H002, 180.4 kHz = 180K and 180.7 kHz = 181K.
- Recommendation ITU-R SM.1138 (formulas and examples of necessary bandwidth).
  The J3E (2K70J3E), R3E (2K99R3E), J8E (5K75J8E) and B8E (6K00B8E) examples
  were read in a secondary copy of the SM.1138 table; the A3E (6K00A3E,
  8K00A3E) and H3E (3K00H3E) worked examples are from memory, as
  REFERENCES.md says.
"""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from iqsift.emission import (
    HANDLED_CLASSES,
    MODES,
    Emission,
    allowed_modes,
    designator,
    format_bandwidth_code,
    necessary_bandwidth,
    parse_bandwidth_code,
    parse_emission,
    parse_emission_class,
)
from iqsift.errors import InputError, ParameterError

# (code, Hz) pairs from the example table of Radio Regulations Appendix 1, Section I §2.
APPENDIX_1_EXAMPLES = [
    ("H002", 0.002),
    ("H100", 0.1),
    ("25H3", 25.3),
    ("400H", 400.0),
    ("2K40", 2400.0),
    ("6K00", 6000.0),
    ("12K5", 12500.0),
    ("180K", 180000.0),
    ("181K", 181000.0),
    ("1M25", 1.25e6),
    ("2M00", 2e6),
    ("10M0", 10e6),
    ("202M", 202e6),
    ("5G65", 5.65e9),
]


@pytest.mark.parametrize(("code", "hz"), APPENDIX_1_EXAMPLES)
def test_appendix_1_examples_parse(code: str, hz: float) -> None:
    # ITU RR Appendix 1, Section I §2, footnote examples.
    assert parse_bandwidth_code(code) == pytest.approx(hz, rel=1e-12)
    assert parse_bandwidth_code(code.lower()) == pytest.approx(hz, rel=1e-12)


@pytest.mark.parametrize(
    ("hz", "code"),
    [
        (0.002, "H002"),
        (0.1, "H100"),
        (25.3, "25H3"),
        (400.0, "400H"),
        (2400.0, "2K40"),
        (6000.0, "6K00"),
        (12500.0, "12K5"),
        (180.4e3, "180K"),  # Appendix 1: 180.4 kHz = 180K
        (180.5e3, "181K"),  # Appendix 1: 180.5 kHz = 181K (half rounds up)
        (180.7e3, "181K"),  # Appendix 1: 180.7 kHz = 181K
        (1.25e6, "1M25"),
        (2e6, "2M00"),
        (10e6, "10M0"),
        (202e6, "202M"),
        (5.65e9, "5G65"),
    ],
)
def test_appendix_1_examples_format(hz: float, code: str) -> None:
    # ITU RR Appendix 1, Section I §2: three significant figures, letter as decimal point.
    assert format_bandwidth_code(hz) == code


def test_format_crosses_unit_boundaries_when_rounding() -> None:
    # Appendix 1 §2: 999 Hz is the largest written in Hz; 999.5 Hz rounds to 1.00 kHz.
    assert format_bandwidth_code(999.4) == "999H"
    assert format_bandwidth_code(999.5) == "1K00"
    assert format_bandwidth_code(0.9995) == "1H00"
    assert format_bandwidth_code(0.001) == "H001"  # 0.001 Hz is the smallest the Appendix writes


@pytest.mark.parametrize("bad", [0.0, -6000.0, math.inf, math.nan, 0.0004, 999.5e9, True, "6k", None])
def test_format_refuses_values_outside_the_code(bad: object) -> None:
    with pytest.raises(ParameterError):
        format_bandwidth_code(bad)  # type: ignore[arg-type]


@pytest.mark.parametrize(
    ("code", "rule"),
    [
        ("0K10", "first character"),  # Appendix 1: the first character is never 0 ...
        ("K100", "first character"),  # ... nor K, M or G
        ("M100", "first character"),
        ("G100", "first character"),
        ("6K0", "4 characters"),
        ("6K000", "4 characters"),
        ("", "4 characters"),
        ("6KK0", "more than one unit letter"),
        ("6KM0", "more than one unit letter"),
        ("6000", "no unit letter"),
        ("6K0A", "three numerals"),
        ("6-00", "no unit letter"),
        ("H000", "0 Hz"),
    ],
)
def test_malformed_bandwidth_codes_are_refused(code: str, rule: str) -> None:
    with pytest.raises(ParameterError) as info:
        parse_bandwidth_code(code)
    message = str(info.value)
    assert repr(code) in message and rule in message and "\n" not in message


def test_bandwidth_code_must_be_text() -> None:
    with pytest.raises(ParameterError):
        parse_bandwidth_code(6000)  # type: ignore[arg-type]


@st.composite
def valid_codes(draw: st.DrawFn) -> str:
    """Every code the Appendix 1 grammar allows: letter at position 0 only for H."""
    position = draw(st.integers(0, 3))
    unit = "H" if position == 0 else draw(st.sampled_from("HKMG"))
    digits = draw(st.text("0123456789", min_size=3, max_size=3))
    if position > 0 and digits[0] == "0":
        digits = draw(st.sampled_from("123456789")) + digits[1:]
    if int(digits) == 0:
        digits = "001"
    return digits[:position] + unit + digits[position:]


@settings(max_examples=300, deadline=None)
@given(valid_codes())
def test_every_valid_code_round_trips(code: str) -> None:
    # Each value has exactly one code under Appendix 1 (first character never 0),
    # so parse -> format must give the code back.
    assert format_bandwidth_code(parse_bandwidth_code(code)) == code


@settings(max_examples=300, deadline=None)
@given(st.floats(min_value=0.001, max_value=998e9, allow_nan=False, allow_infinity=False))
def test_format_keeps_three_significant_figures(hz: float) -> None:
    back = parse_bandwidth_code(format_bandwidth_code(hz))
    if back < 1.0:
        assert abs(back - hz) <= 0.0005 + 1e-12  # below 1 Hz: thousandths of a hertz
    else:
        exponent = math.floor(math.log10(back))
        assert abs(back - hz) <= 0.5 * 10 ** (exponent - 2) * (1 + 1e-9)


def test_parse_emission_fields() -> None:
    em = parse_emission("2k70j3ejn")  # lower case and optional 4th/5th symbols
    assert isinstance(em, Emission)
    assert em.code == "2K70J3EJN"
    assert em.bandwidth_hz == 2700.0
    assert (em.modulation, em.nature, em.information, em.extra) == ("J", "3", "E", "JN")
    assert em.emission_class == "J3E"
    assert em.mode == "usb" and em.audio_low_hz == 300.0
    assert em.to_dict()["emission_class"] == "J3E"


@pytest.mark.parametrize(
    ("code", "mode", "audio_low"),
    [
        ("6K00A3E", "envelope", 300.0),
        ("3K00H3E", "usb", 0.0),
        ("2K99R3E", "usb", 0.0),
        ("2K70J3E", "usb", 300.0),
        ("6K00B8E", "isb", 0.0),  # RR Appendix 1: B = independent sidebands
        ("6K00B7E", "isb", 0.0),
        ("5K75J8E", "usb", 300.0),
    ],
)
def test_default_detectors(code: str, mode: str, audio_low: float) -> None:
    em = parse_emission(code)
    assert em.mode == mode
    assert em.audio_low_hz == audio_low
    assert em.mode in MODES


def test_modes_on_request() -> None:
    # DSB with suppressed carrier is written A as well: "dsb" only when asked.
    assert parse_emission("6K00A3E", mode="dsb").mode == "dsb"
    assert parse_emission("6K00A3E", mode="coherent").mode == "coherent"
    assert parse_emission("2K70J3E", mode="LSB").mode == "lsb"
    assert parse_emission("6K00B8E", mode="lsb").mode == "lsb"
    with pytest.raises(ParameterError, match="does not suit"):
        parse_emission("2K70J3E", mode="envelope")
    with pytest.raises(ParameterError, match="does not suit"):
        parse_emission("2K99R3E", mode="dsb")
    with pytest.raises(ParameterError, match="not a detector"):
        parse_emission("6K00A3E", mode="fm")


def test_modes_tuple() -> None:
    assert MODES == ("envelope", "coherent", "usb", "lsb", "dsb", "isb")
    assert set(allowed_modes("A3E")) == set(MODES) - {"isb"}  # one programme: no independent sidebands
    assert allowed_modes("B8E") == ("isb", "usb", "lsb")
    assert allowed_modes("J3E") == ("usb", "lsb")


@pytest.mark.parametrize(
    ("code", "cls", "why"),
    [
        ("16K0F3E", "F3E", "frequency modulation"),
        ("16K0G3E", "G3E", "phase modulation"),
        ("6K00C3F", "C3F", "vestigial sideband"),
        ("100HA1A", "A1A", "digital"),
        ("2K70J2B", "J2B", "digital"),
        ("2K80J2D", "J2D", "digital"),
        ("6K00A7E", "A7E", "digital"),
        ("6K00A9W", "A9W", "composite"),
        ("3K00A3C", "A3C", "facsimile"),
        ("0H00N0N", None, None),  # malformed bandwidth code, refused before the class
    ],
)
def test_classes_iqsift_does_not_demodulate(code: str, cls: str | None, why: str | None) -> None:
    with pytest.raises(ParameterError) as info:
        parse_emission(code)
    message = str(info.value)
    assert "\n" not in message
    if cls is not None:
        assert f"class {cls}" in message and why in message
        assert "cannot be demodulated by iqsift" in message
        assert "A3E, H3E, R3E, J3E, B8E" in message


def test_refusal_message_matches_the_documented_wording() -> None:
    with pytest.raises(ParameterError) as info:
        parse_emission("16K0F3E")
    assert str(info.value).startswith(
        "emission 16K0F3E: class F3E (frequency modulation) cannot be demodulated by iqsift; it handles A3E, H3E, R3E, J3E, B8E"
    )


@pytest.mark.parametrize("code", ["6K00Z3E", "6K00A4E", "6K00A3Z", "6K00A3EZ", "6K00A3EJZ", "6K00A3EJNX", "A3E", "6K00", 6000])
def test_malformed_designators(code: object) -> None:
    with pytest.raises(ParameterError):
        parse_emission(code)  # type: ignore[arg-type]


def test_class_alone() -> None:
    em = parse_emission_class("a3e")
    assert em.bandwidth_hz is None and em.emission_class == "A3E" and em.mode == "envelope"
    with pytest.raises(ParameterError):
        parse_emission_class("F3E")
    assert set(HANDLED_CLASSES) >= {"A3E", "H3E", "R3E", "J3E", "B8E"}
    for cls in HANDLED_CLASSES:
        assert parse_emission_class(cls).emission_class == cls


def test_errors_are_value_errors() -> None:
    # errors.py: ParameterError is an InputError and a ValueError.
    with pytest.raises(ValueError):
        parse_emission("16K0F3E")
    with pytest.raises(InputError):
        parse_bandwidth_code("K100")


@pytest.mark.parametrize(
    ("cls", "highest", "lowest", "kwargs", "expected"),
    [
        # ITU-R SM.1138, double-sideband telephony: Bn = 2M, M = 3000 Hz -> 6K00A3E (memory).
        ("A3E", 3000.0, 0.0, {}, "6K00A3E"),
        # SM.1138, sound broadcasting, double sideband: Bn = 2M, M = 4000 Hz -> 8K00A3E (memory).
        ("A3E", 4000.0, 0.0, {}, "8K00A3E"),
        # SM.1138, single sideband full carrier: Bn = M, M = 3000 Hz -> 3K00H3E (memory).
        ("H3E", 3000.0, 0.0, {}, "3K00H3E"),
        # SM.1138, reduced carrier (Lincompex) example: Bn = M, M = 2990 Hz -> 2K99R3E.
        ("R3E", 2990.0, 0.0, {}, "2K99R3E"),
        # SM.1138, suppressed carrier: Bn = M - lowest, 3000 - 300 -> 2K70J3E.
        ("J3E", 3000.0, 300.0, {}, "2K70J3E"),
        # SM.1138, telephony with privacy, Nc = 2: Bn = Nc*M - lowest, 2*3000 - 250 -> 5K75J8E.
        ("J8E", 3000.0, 250.0, {"channels": 2}, "5K75J8E"),
        # SM.1138, independent sidebands, 2 channels: Bn = sum of M, 3000 + 3000 -> 6K00B8E.
        ("B8E", (3000.0, 3000.0), 0.0, {}, "6K00B8E"),
        ("B8E", 3000.0, 0.0, {}, "6K00B8E"),
    ],
)
def test_sm1138_worked_examples(cls: str, highest, lowest: float, kwargs: dict, expected: str) -> None:
    bn = necessary_bandwidth(cls, highest, lowest, **kwargs)
    assert designator(bn, cls) == expected
    assert parse_emission(expected).bandwidth_hz == pytest.approx(bn)


def test_necessary_bandwidth_details() -> None:
    # Sum of the sidebands' M when they differ (SM.1138 B8E formula).
    assert necessary_bandwidth("B8E", [3000.0, 2000.0]) == 5000.0
    # A designator in front of the class is accepted and ignored.
    assert necessary_bandwidth("6K00A3E", 3000.0) == 6000.0
    with pytest.raises(ParameterError, match="below the highest"):
        necessary_bandwidth("J3E", 3000.0, 3000.0)
    with pytest.raises(ParameterError):
        necessary_bandwidth("J3E", -3000.0)
    with pytest.raises(ParameterError):
        necessary_bandwidth("A3E", math.nan)
    with pytest.raises(ParameterError):
        necessary_bandwidth("A3E", [3000.0, 3000.0])
    with pytest.raises(ParameterError):
        necessary_bandwidth("J8E", 3000.0, 250.0, channels=0)
    with pytest.raises(ParameterError, match="no ITU-R SM.1138 formula"):
        necessary_bandwidth("B3E", 3000.0)
    with pytest.raises(ParameterError, match="cannot be demodulated"):
        necessary_bandwidth("F3E", 3000.0)
