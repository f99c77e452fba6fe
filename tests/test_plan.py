"""Tests for iqsift.plan: channel-plan TOML files.

External references: TOML v1.0 (toml.io) for the file format, read with the
standard library's tomllib; the ITU emission designator rules (Radio Regulations
Appendix 1) through iqsift.emission; the ICAO aeronautical channel naming
(memory, see tests/test_rasters.py) through iqsift.rasters.
"""

from __future__ import annotations

import json
import math
import re
import sys

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from iqsift.emission import MODES, parse_emission
from iqsift.errors import InputError, ParameterError
from iqsift.plan import (
    CHANNEL_KEYS,
    DEFAULT_KEYS,
    ChannelPlan,
    PlannedChannel,
    format_plan,
    load_plan,
    parse_plan,
    plan_from_dict,
    sanitize_name,
)
from iqsift.rasters import aero_channel, aero_channel_names

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

EXAMPLE = """
[defaults]
bandwidth = "6k"
mode = "envelope"
audio_rate = 16000

[[channel]]
name = "tower-east"
freq = "127.35M"
emission = "6K00A3E"
mode = "coherent"
squelch_db = 10
audio_rate = 16000

[[channel]]
name = "ops"
offset = "-25k"

[[channel]]
name = "approach"
channel_name = "118.010"
emission = "2K70J3E"
"""


def one_line_error(text: str, source: str = "plan.toml") -> str:
    with pytest.raises(ParameterError) as info:
        parse_plan(text, source)
    message = str(info.value)
    assert "\n" not in message and "\r" not in message
    assert message.startswith(f"{source}:")
    return message


# --------------------------------------------------------------------------- the example


def test_example_plan() -> None:
    plan = parse_plan(EXAMPLE, "plan.toml")
    assert isinstance(plan, ChannelPlan) and plan.source == "plan.toml" and len(plan) == 3
    tower, ops, approach = plan.channels
    assert tower == PlannedChannel(
        name="tower-east",
        freq_hz=127.35e6,
        offset_hz=None,
        bandwidth_hz=6000.0,  # from the designator 6K00 (RR Appendix 1)
        mode="coherent",
        emission="6K00A3E",
        audio_low_hz=300.0,
        audio_rate_hz=16000.0,
        squelch_db=10.0,
        channel_name=None,
    )
    assert ops.offset_hz == -25_000.0 and ops.freq_hz is None
    assert ops.bandwidth_hz == 6000.0 and ops.mode == "envelope" and ops.emission is None
    assert ops.audio_low_hz == 300.0 and ops.squelch_db is None
    # ICAO name route: 118.010 is the 8.33 kHz channel on 118.008333 MHz (memory).
    assert approach.channel_name == "118.010"
    assert approach.freq_hz == pytest.approx(118.0e6 + 25e3 / 3, abs=1e-6)
    assert approach.bandwidth_hz == 2700.0 and approach.mode == "usb" and approach.audio_low_hz == 300.0
    assert plan.names == ("tower-east", "ops", "approach")
    assert plan.by_name("ops") is ops
    json.dumps(plan.to_dict())  # JSON-ready
    with pytest.raises(ParameterError):
        plan.by_name("missing")


def test_example_round_trips_through_format() -> None:
    plan = parse_plan(EXAMPLE, "plan.toml")
    text = format_plan(plan)
    assert parse_plan(text).channels == plan.channels
    assert format_plan(list(plan.channels)) == text
    tomllib.loads(text)  # plain TOML


def test_load_plan_from_file(tmp_path) -> None:
    path = tmp_path / "plan.toml"
    path.write_text(EXAMPLE, encoding="utf-8")
    plan = load_plan(path)
    assert plan.source == str(path)
    assert plan.channels == parse_plan(EXAMPLE).channels
    # A byte-order mark from a Windows editor is tolerated.
    path.write_bytes(b"\xef\xbb\xbf" + EXAMPLE.encode())
    assert load_plan(str(path)).channels == plan.channels


def test_file_errors(tmp_path) -> None:
    with pytest.raises(ParameterError, match="does not exist"):
        load_plan(tmp_path / "nothing.toml")
    with pytest.raises(ParameterError, match="is a directory"):
        load_plan(tmp_path)
    bad = tmp_path / "latin1.toml"
    bad.write_bytes(b'[[channel]]\nname = "caf\xe9"\n')
    with pytest.raises(ParameterError, match=r"line 2: not UTF-8"):
        load_plan(bad)
    with pytest.raises(ParameterError):
        load_plan(42)  # type: ignore[arg-type]


# --------------------------------------------------------------------------- defaults


def test_channel_bandwidth_replaces_default_emission_and_what_it_implied() -> None:
    text = """
    [defaults]
    emission = "2K70J3E"
    [[channel]]
    name = "a"
    offset = 0
    [[channel]]
    name = "b"
    offset = 0
    bandwidth = "8k"
    """
    a, b = parse_plan(text).channels
    assert (a.bandwidth_hz, a.mode, a.emission, a.audio_low_hz) == (2700.0, "usb", "2K70J3E", 300.0)
    assert (b.bandwidth_hz, b.mode, b.emission, b.audio_low_hz) == (8000.0, "envelope", None, 300.0)


def test_channel_emission_wins_over_default_bandwidth_and_mode() -> None:
    text = """
    [defaults]
    bandwidth = 6000
    mode = "envelope"
    audio_low = 200
    [[channel]]
    name = "ssb"
    offset = "10k"
    emission = "2K99R3E"
    [[channel]]
    name = "am"
    offset = "20k"
    """
    ssb, am = parse_plan(text).channels
    # R3E defaults to usb with the band down to 0 Hz (SM.1138: Bn = M).
    assert (ssb.bandwidth_hz, ssb.mode, ssb.audio_low_hz) == (2990.0, "usb", 0.0)
    assert (am.bandwidth_hz, am.mode, am.audio_low_hz) == (6000.0, "envelope", 200.0)


def test_default_mode_applies_to_default_emission() -> None:
    text = """
    [defaults]
    emission = "2K70J3E"
    mode = "lsb"
    squelch_db = 6
    audio_rate = "8k"
    [[channel]]
    name = "low"
    freq = "8.8M"
    [[channel]]
    name = "high"
    freq = "8.9M"
    mode = "usb"
    squelch_db = 0
    """
    low, high = parse_plan(text).channels
    assert (low.mode, low.squelch_db, low.audio_rate_hz) == ("lsb", 6.0, 8000.0)
    assert (high.mode, high.squelch_db) == ("usb", 0.0)


def test_defaults_errors() -> None:
    base = '\n[[channel]]\nname = "a"\noffset = 0\n'
    msg = one_line_error('[defaults]\nfreq = "1M"' + base)
    assert "[defaults]: key 'freq'" in msg
    msg = one_line_error('[defaults]\nemission = "6K00A3E"\nbandwidth = "6k"' + base)
    assert "[defaults]" in msg and "not both" in msg
    msg = one_line_error('[defaults]\nemission = "2K70J3E"\nmode = "dsb"' + base)
    assert "[defaults]: key 'mode'" in msg and "does not suit" in msg
    msg = one_line_error('[defaults]\ncolour = "red"' + base)
    assert "[defaults]: key 'colour': unknown key" in msg
    msg = one_line_error('defaults = 3' + base)
    assert "[defaults]" in msg
    msg = one_line_error('[defaults]\nbandwidth = "6q"' + base)
    assert "[defaults]: key 'bandwidth': '6q' is not a frequency" in msg


# --------------------------------------------------------------------------- ICAO route


@pytest.mark.parametrize(
    ("value", "name", "freq"),
    [
        ('"118.010"', "118.010", 118.0e6 + 25e3 / 3),  # memory pairing, REFERENCES.md
        ('"118.005"', "118.005", 118.0e6),
        ('"118.030"', "118.030", 118.025e6),
        ('"121.5"', "121.500", 121.5e6),
        ("118.015", "118.015", 118.0e6 + 50e3 / 3),  # a TOML float
    ],
)
def test_channel_name_route(value: str, name: str, freq: float) -> None:
    text = f'[[channel]]\nname = "c"\nchannel_name = {value}\nbandwidth = "8.33k"\n'
    (ch,) = parse_plan(text).channels
    assert ch.channel_name == name and ch.offset_hz is None
    assert ch.freq_hz == pytest.approx(freq, abs=1e-6)
    assert parse_plan(format_plan([ch])).channels == (ch,)


def test_channel_name_errors() -> None:
    msg = one_line_error('[[channel]]\nname = "c"\nchannel_name = "118.020"\nbandwidth = 8000\n')
    assert msg.startswith("plan.toml: channel 1 'c': key 'channel_name':") and "not used" in msg
    msg = one_line_error('[[channel]]\nname = "c"\nchannel_name = "150.000"\nbandwidth = 8000\n')
    assert "key 'channel_name'" in msg and "outside" in msg
    msg = one_line_error('[[channel]]\nname = "c"\nchannel_name = true\nbandwidth = 8000\n')
    assert "key 'channel_name'" in msg


def test_tuning_offset() -> None:
    tower, ops, approach = parse_plan(EXAMPLE).channels
    assert tower.tuning_offset_hz(127.0e6) == pytest.approx(350e3)
    assert ops.tuning_offset_hz(127.0e6) == -25e3
    assert ops.tuning_offset_hz(None) == -25e3
    # DESIGN.md: without a capture centre, a user's frequency is an offset.
    assert tower.tuning_offset_hz(None) == 127.35e6
    with pytest.raises(ParameterError, match="no centre"):
        approach.tuning_offset_hz(None)


# --------------------------------------------------------------------------- errors


def test_documented_error_wording() -> None:
    text = """
    [[channel]]
    name = "tower"
    freq = "127.35M"
    bandwidth = "6k"
    [[channel]]
    name = "ops"
    freq = "127.1M"
    bandwidth = "6q"
    """
    msg = one_line_error(text)
    assert msg.startswith("plan.toml: channel 2 'ops': key 'bandwidth': '6q' is not a frequency")


def test_malformed_toml_names_file_and_line() -> None:
    msg = one_line_error('[[channel]]\nname = "a"\nfreq = 12 7\n', "my plan.toml")
    assert "malformed TOML" in msg and re.search(r"line 3\b", msg)
    msg = one_line_error('[[channel]]\nname = "a', "p.toml")
    assert "malformed TOML" in msg and "line" in msg


CHANNEL = '[[channel]]\nname = "a"\n'


@pytest.mark.parametrize(
    ("body", "needle"),
    [
        ('offset = 0\nbandwidth = 6000\ncolour = "red"', "key 'colour': unknown key"),
        ('bandwidth = 6000', "no frequency"),
        ('freq = "1M"\noffset = 0\nbandwidth = 6000', "key 'offset': give only one"),
        ('freq = "1M"\nchannel_name = "118.000"\nbandwidth = 6000', "give only one"),
        ('freq = "-1M"\nbandwidth = 6000', "key 'freq'"),
        ('freq = 0\nbandwidth = 6000', "key 'freq'"),
        ('freq = "1 MHz"\nbandwidth = 6000\nemission = "6K00A3E"', "not both"),
        ('offset = 0', "no bandwidth"),
        ('offset = 0\nbandwidth = 0', "key 'bandwidth'"),
        ('offset = 0\nbandwidth = "-6k"', "key 'bandwidth'"),
        ('offset = 0\nbandwidth = [6000]', "key 'bandwidth'"),
        ('offset = 0\nbandwidth = true', "key 'bandwidth': True is not a frequency"),
        ('offset = 0\nbandwidth = nan', "key 'bandwidth'"),
        ('offset = inf\nbandwidth = 6000', "key 'offset'"),
        ('offset = "5 m"\nbandwidth = 6000', "key 'offset'"),
        ('offset = 0\nemission = "16K0F3E"', "key 'emission': emission 16K0F3E: class F3E (frequency modulation) cannot be demodulated"),
        ('offset = 0\nemission = "6K0A3E"', "key 'emission'"),
        ('offset = 0\nemission = 6000', "key 'emission'"),
        ('offset = 0\nemission = "2K70J3E"\nmode = "envelope"', "key 'mode'"),
        ('offset = 0\nbandwidth = 6000\nmode = "fm"', "key 'mode': 'fm' is not a detector"),
        ('offset = 0\nbandwidth = 6000\nmode = 1', "key 'mode'"),
        ('offset = 0\nbandwidth = 6000\naudio_rate = 1000', "key 'audio_rate'"),
        ('offset = 0\nbandwidth = 6000\naudio_rate = 384000', "key 'audio_rate'"),
        ('offset = 0\nbandwidth = 6000\naudio_rate = 16000.5', "key 'audio_rate'"),
        ('offset = 0\nbandwidth = 6000\nsquelch_db = -3', "key 'squelch_db'"),
        ('offset = 0\nbandwidth = 6000\nsquelch_db = inf', "key 'squelch_db'"),
        ('offset = 0\nbandwidth = 6000\nsquelch_db = "10"', "key 'squelch_db'"),
        ('offset = 0\nbandwidth = 6000\nsquelch_db = 1e999', "key 'squelch_db'"),
        ('offset = 0\nbandwidth = 6000\naudio_low = -10', "key 'audio_low'"),
        ('offset = 0\nbandwidth = 6000\naudio_low = 3000', "key 'audio_low'"),  # AM: audio top is 3 kHz
        ('offset = 0\nbandwidth = 6000\naudio_low = 4000\naudio_rate = 8000', "key 'audio_low'"),
    ],
)
def test_channel_errors(body: str, needle: str) -> None:
    msg = one_line_error(CHANNEL + body + "\n")
    assert msg.startswith("plan.toml: channel 1 'a':")
    assert needle in msg


def test_usb_audio_band_reaches_the_full_bandwidth() -> None:
    # For a single-sideband detector the audio runs up to the RF bandwidth, not half of it.
    (ch,) = parse_plan(CHANNEL + 'offset = 0\nbandwidth = 2700\nmode = "usb"\naudio_low = 2000\n').channels
    assert ch.audio_low_hz == 2000.0


@pytest.mark.parametrize(
    ("text", "needle"),
    [
        ('[[channel]]\nfreq = 1e6\nbandwidth = 6000\n', "channel 1: key 'name': missing"),
        ('[[channel]]\nname = 3\nfreq = 1e6\nbandwidth = 6000\n', "channel 1: key 'name': 3 is not text"),
        ('[[channel]]\nname = "  "\nfreq = 1e6\nbandwidth = 6000\n', "key 'name'"),
        ('[[channel]]\nname = "a\\nb"\nfreq = 1e6\nbandwidth = 6000\n', "key 'name'"),
        ('[[channel]]\nname = "../.."\nfreq = 1e6\nbandwidth = 6000\n', "no letters or digits"),
        ('[[channel]]\nname = "' + "x" * 101 + '"\nfreq = 1e6\nbandwidth = 6000\n', "longer than"),
        (
            '[[channel]]\nname = "Tower East"\noffset = 0\nbandwidth = 6000\n'
            '[[channel]]\nname = "tower_east"\noffset = 1\nbandwidth = 6000\n',
            "channel 2 'tower_east': key 'name': file name 'tower_east' clashes with channel 1 'Tower East'",
        ),
        ("", "no channels"),
        ("channel = []", "no channels"),
        ('[channel]\nname = "a"', "[[channel]]"),
        ("channel = [1, 2]", "channel 1: must be a table"),
        ('title = "x"\n' + CHANNEL + "offset = 0\nbandwidth = 1\n", "unknown top-level key 'title'"),
    ],
)
def test_structure_errors(text: str, needle: str) -> None:
    msg = one_line_error(text)
    assert needle in msg


def test_errors_are_parameter_errors_and_value_errors() -> None:
    with pytest.raises(ValueError):
        parse_plan("x = [")
    with pytest.raises(InputError):
        plan_from_dict([1, 2])


# --------------------------------------------------------------------------- sanitize_name


@pytest.mark.parametrize(
    ("name", "stem"),
    [
        ("tower-east", "tower-east"),
        ("Tower East", "Tower_East"),
        ("../../etc/passwd", "etc_passwd"),
        ("a..b", "a.b"),
        ("a\\b/c", "a_b_c"),
        (".hidden", "hidden"),
        ("-rf", "rf"),
        ("ch\x00\x1f1", "ch_1"),
        ("CON", "CON_"),  # Windows device name
        ("nul.wav", "nul_.wav"),
        ("Ｔｏｗｅｒ", "Tower"),  # NFKC: full-width letters
        ("tour-é", "tour-é"),
    ],
)
def test_sanitize_examples(name: str, stem: str) -> None:
    assert sanitize_name(name) == stem


@pytest.mark.parametrize("name", ["", "   ", "..", "/", "\x00", "-._", 3, None])
def test_sanitize_refuses_names_without_substance(name: object) -> None:
    with pytest.raises(ParameterError):
        sanitize_name(name)  # type: ignore[arg-type]


@settings(max_examples=400, deadline=None)
@given(st.text(max_size=150))
def test_sanitize_properties(name: str) -> None:
    try:
        stem = sanitize_name(name)
    except ParameterError:
        return
    assert stem and len(stem) <= 64 and len(stem.encode("utf-8")) <= 200
    assert ".." not in stem and "/" not in stem and "\\" not in stem
    assert all(ch.isprintable() and not ch.isspace() for ch in stem)
    assert stem[0] not in ".-_" and stem[-1] not in ".-"
    assert all(ch.isalnum() or ch in "-_." for ch in stem)
    assert sanitize_name(stem) == stem


# --------------------------------------------------------------------------- hypothesis: garbage never escapes


def _toml_str(text: str) -> str:
    out = []
    for ch in text:
        if ch in '"\\':
            out.append("\\" + ch)
        elif ord(ch) < 0x20 or ord(ch) == 0x7F:
            out.append(f"\\u{ord(ch):04X}")
        else:
            out.append(ch)
    return '"' + "".join(out) + '"'


def _toml_value(value: object) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if math.isnan(value):
            return "nan"
        if math.isinf(value):
            return "inf" if value > 0 else "-inf"
        return repr(value)
    if isinstance(value, str):
        return _toml_str(value)
    if isinstance(value, list):
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{" + ", ".join(f"{_toml_str(k)} = {_toml_value(v)}" for k, v in value.items()) + "}"
    raise TypeError(value)


def _toml_document(doc: dict) -> str:
    lines = []
    if "defaults" in doc:
        lines.append("[defaults]")
        lines += [f"{_toml_str(k)} = {_toml_value(v)}" for k, v in doc["defaults"].items()]
    for channel in doc.get("channel", []):
        lines.append("[[channel]]")
        lines += [f"{_toml_str(k)} = {_toml_value(v)}" for k, v in channel.items()]
    return "\n".join(lines) + "\n"


scalars = st.one_of(
    st.text(max_size=12),
    st.integers(min_value=-(2**70), max_value=2**70),
    st.floats(allow_nan=True, allow_infinity=True),
    st.booleans(),
)
garbage = st.recursive(
    scalars,
    lambda inner: st.one_of(st.lists(inner, max_size=3), st.dictionaries(st.text(max_size=5), inner, max_size=3)),
    max_leaves=5,
)
GOOD = {
    "name": st.one_of(
        st.sampled_from(["tower", "ops", "Ops", "a b", "é", "x/y", 'q"uote\\']),
        st.builds(lambda s: "n-" + s, st.text(st.characters(blacklist_categories=("Cc", "Cs")), max_size=6)),
    ),
    "freq": st.sampled_from(["127.35M", 118.1e6, "8.33k", "2.4e6", "6 kHz", "1G", 1]),
    "offset": st.sampled_from(["-25k", 0, 12_500.0, "1M", -3.5]),
    "channel_name": st.sampled_from(["118.010", "121.5", 118.015, "136.990", "118.000"]),
    "emission": st.sampled_from(["6K00A3E", "2K70J3E", "2k99r3e", "6K00B8E", "3K00H3E", "8K00A3EGN"]),
    "bandwidth": st.sampled_from(["6k", 8333.3, "25k", "2.7k", 3000, "10 kHz"]),
    "mode": st.sampled_from(list(MODES) + ["USB"]),
    "audio_low": st.sampled_from([0, 300, "300", 100.5]),
    "audio_rate": st.sampled_from([8000, 16000, "48k", 4000, 192000]),
    "squelch_db": st.sampled_from([0, 6.5, 10]),
}
PLAUSIBLE_BAD = {
    "name": st.sampled_from(["", "..", "a\nb", " ", "/"]),
    "freq": st.sampled_from([-5, 0, "127.35m", "x"]),
    "offset": st.sampled_from(["x", "1e400", "5 m"]),
    "channel_name": st.sampled_from(["118.020", "137.000", "1", "118.001"]),
    "emission": st.sampled_from(["16K0F3E", "6K00", "0K10A3E", "6K00A9W"]),
    "bandwidth": st.sampled_from([0, "-1k", "6q"]),
    "mode": st.sampled_from(["fm", "", "am"]),
    "audio_low": st.sampled_from([5000.0, -1, 1e9]),
    "audio_rate": st.sampled_from([16000.5, 1000, 200000, "16 k"]),
    "squelch_db": st.sampled_from([-1, "10", 1e999]),
}
keys = st.one_of(st.sampled_from(CHANNEL_KEYS), st.text(max_size=6))
LOCATION = ("freq", "offset", "channel_name")


def _value(draw: st.DrawFn, key: str) -> object:
    roll = draw(st.integers(0, 19))
    if key in GOOD and roll < 16:
        return draw(GOOD[key])
    if key in PLAUSIBLE_BAD and roll < 18:
        return draw(PLAUSIBLE_BAD[key])
    return draw(garbage)


@st.composite
def channel_tables(draw: st.DrawFn) -> dict:
    """Mostly well-formed channels, with missing, doubled, unknown keys and garbage values mixed in."""
    chosen = ["name", draw(st.sampled_from(LOCATION)), draw(st.sampled_from(["bandwidth", "emission"]))]
    chosen += draw(st.lists(st.sampled_from(CHANNEL_KEYS), max_size=3))
    if draw(st.integers(0, 19)) == 0:
        chosen.remove(draw(st.sampled_from(chosen)))
    if draw(st.integers(0, 19)) == 0:
        chosen.append(draw(keys))
    return {key: _value(draw, key) for key in dict.fromkeys(chosen)}


@st.composite
def default_tables(draw: st.DrawFn) -> dict:
    chosen = draw(st.lists(st.sampled_from(DEFAULT_KEYS), max_size=4, unique=True))
    if draw(st.integers(0, 19)) == 0:
        chosen.append(draw(keys))
    return {key: _value(draw, key) for key in dict.fromkeys(chosen)}


@st.composite
def documents(draw: st.DrawFn) -> dict:
    doc: dict = {}
    if draw(st.booleans()):
        doc["defaults"] = draw(default_tables())
    doc["channel"] = draw(st.lists(channel_tables(), max_size=3))
    return doc


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(documents())
def test_random_plans_only_raise_parameter_errors(doc: dict) -> None:
    text = _toml_document(doc)
    try:
        plan = parse_plan(text, "fuzz.toml")
    except ParameterError as exc:
        message = str(exc)
        assert "\n" not in message and message.startswith("fuzz.toml:")
        return
    # Whatever was accepted is consistent and round-trips.
    for ch in plan:
        assert (ch.freq_hz is None) != (ch.offset_hz is None)
        assert ch.bandwidth_hz > 0 and ch.mode in MODES
        assert 4000 <= ch.audio_rate_hz <= 192000
    assert parse_plan(format_plan(plan)).channels == plan.channels


@settings(max_examples=200, deadline=None)
@given(st.one_of(garbage, st.dictionaries(st.sampled_from(["defaults", "channel", "x"]), garbage, max_size=3)))
def test_plan_from_dict_garbage(data: object) -> None:
    try:
        plan_from_dict(data, "dict")
    except ParameterError as exc:
        assert "\n" not in str(exc)


@settings(max_examples=300, deadline=None)
@given(st.text(max_size=200))
def test_random_text_only_raises_parameter_errors(text: str) -> None:
    try:
        parse_plan(text, "t.toml")
    except ParameterError as exc:
        assert "\n" not in str(exc)


# --------------------------------------------------------------------------- hypothesis: valid plans round-trip

finite_hz = st.floats(min_value=1.0, max_value=6e9, allow_nan=False, allow_infinity=False)


@st.composite
def valid_channels(draw: st.DrawFn, index: int) -> PlannedChannel:
    name = draw(st.text(st.characters(blacklist_categories=("Cc", "Cs", "Zl", "Zp")), min_size=1, max_size=20))
    name = f"ch{index}-{name}"
    route = draw(st.sampled_from(["freq", "offset", "channel_name"]))
    freq = offset = None
    channel_name = None
    if route == "freq":
        freq = draw(finite_hz)
    elif route == "offset":
        offset = draw(st.floats(min_value=-1e8, max_value=1e8, allow_nan=False))
    else:
        channel_name = draw(st.sampled_from(aero_channel_names("8.33k") + aero_channel_names("25k")))
        freq = aero_channel(channel_name).frequency_hz
    if draw(st.booleans()):
        emission = parse_emission(draw(st.sampled_from(["6K00A3E", "8K00A3E", "2K70J3E", "2K99R3E", "3K00H3E", "6K00B8E"])))
        mode = draw(st.sampled_from(["usb", "lsb"] if emission.modulation in "RJB" else ["envelope", "usb", "coherent"]))
        bandwidth = emission.bandwidth_hz
        code = emission.code
    else:
        code = None
        bandwidth = draw(st.floats(min_value=2000.0, max_value=200e3))
        mode = draw(st.sampled_from(MODES))
    audio_rate = float(draw(st.integers(4000, 192000)))
    audio_top = min(audio_rate / 2, bandwidth if mode in ("usb", "lsb") else bandwidth / 2)
    audio_low = draw(st.floats(min_value=0.0, max_value=audio_top, exclude_max=True))
    squelch = draw(st.one_of(st.none(), st.floats(min_value=0.0, max_value=80.0)))
    return PlannedChannel(
        name=name,
        freq_hz=freq,
        offset_hz=offset,
        bandwidth_hz=bandwidth,
        mode=mode,
        emission=code,
        audio_low_hz=audio_low,
        audio_rate_hz=audio_rate,
        squelch_db=squelch,
        channel_name=channel_name,
    )


@st.composite
def valid_plans(draw: st.DrawFn) -> list[PlannedChannel]:
    count = draw(st.integers(1, 4))
    return [draw(valid_channels(i)) for i in range(count)]


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])
@given(valid_plans())
def test_valid_plans_round_trip_exactly(channels: list[PlannedChannel]) -> None:
    # Names hold any Unicode but control and line-break characters (quotes,
    # backslashes, emoji ...): they must survive TOML string escaping.
    text = format_plan(channels)
    back = parse_plan(text, "rt.toml")
    assert back.channels == tuple(channels)
    assert format_plan(back) == text


def test_names_with_control_characters_are_refused_when_writing() -> None:
    good = parse_plan(EXAMPLE).channels[1]
    from dataclasses import replace

    for bad in ["a\nb", "a\x00b", "a\u2028b", "a\x85b"]:
        with pytest.raises(ParameterError, match="key 'name'"):
            format_plan([replace(good, name=bad)])


def test_format_plan_checks_what_it_writes() -> None:
    good = parse_plan(EXAMPLE).channels[0]
    from dataclasses import replace

    with pytest.raises(ParameterError, match="bandwidth_hz"):
        format_plan([replace(good, bandwidth_hz=5000.0)])  # differs from 6K00A3E
    with pytest.raises(ParameterError):
        format_plan([replace(good, mode="fm")])
    with pytest.raises(ParameterError):
        format_plan(["not a channel"])  # type: ignore[list-item]
    with pytest.raises(ParameterError):
        format_plan([good, replace(good, name="TOWER-EAST")])  # file names clash
    with pytest.raises(ParameterError):
        format_plan([replace(good, freq_hz=math.inf)])
