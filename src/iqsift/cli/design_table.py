"""The plain-text table of ``iqsift design``: one row per stage of a filter chain, then a summary.

Formatting only: the chain's figures come from the stage dicts of
:mod:`iqsift.dsp.filters` (``DecimationPlan.to_dict()``, ``StageDesign.to_dict()``,
``ResamplerDesign.to_dict()``) or any stage dict with the same keys.
"""

from __future__ import annotations

import math
from typing import Any, Mapping, Sequence

from ..errors import ParameterError

__all__ = ["format_design"]

_COLUMNS: tuple[tuple[str, str, str], ...] = (
    # header, key, format
    ("stage", "name", "s"),
    ("kind", "kind", "s"),
    ("rate in Hz", "rate_in_hz", "hz"),
    ("rate out Hz", "rate_out_hz", "hz"),
    ("taps", "num_taps", "d"),
    ("pass Hz", "passband_hz", "hz"),
    ("stop Hz", "stopband_hz", "hz"),
    ("ripple dB", "measured_ripple_db", ".4f"),
    ("atten dB", "measured_atten_db", ".2f"),
    ("e2e ripple dB", "measured_end_to_end_ripple_db", ".4f"),
    ("e2e atten dB", "measured_end_to_end_atten_db", ".2f"),
    ("delay ms", "group_delay_s", "ms"),
    ("MACs/in", "macs_per_input_sample", ".3f"),
    ("MACs/chain in", "macs_per_chain_input_sample", ".3f"),
)


def _cell(value: Any, fmt: str) -> str:
    """One table cell: ``-`` for a missing value; ``fmt`` is "s", "d", "hz" (no needless decimals), "ms" (s shown in ms) or a format spec."""
    if value is None:
        return "-"
    if isinstance(value, bool) or isinstance(value, str) or fmt == "s":
        return str(value)
    try:
        v = float(value)
    except (TypeError, ValueError):
        return str(value)
    if not math.isfinite(v):
        return str(v)
    if fmt == "d":
        return f"{int(round(v))}"
    if fmt == "hz":
        if v == int(v) and abs(v) < 1e15:
            return f"{int(v)}"
        return f"{v:.3f}".rstrip("0").rstrip(".") if abs(v) < 1e6 else f"{v:.1f}"
    if fmt == "ms":
        return f"{v * 1e3:.3f}"
    return format(v, fmt)


def format_design(design_dict: Mapping[str, Any] | Sequence[Mapping[str, Any]]) -> str:
    """Render a filter chain as a plain-text table (for the ``design`` command).

    Parameters
    ----------
    design_dict : mapping or sequence of mappings
        A chain dict with a ``"stages"`` list (e.g. ``DecimationPlan.to_dict()``),
        a bare list of stage dicts, or one stage dict. Rows read the keys
        ``name`` (else ``index``), ``kind``, ``rate_in_hz``, ``rate_out_hz``,
        ``num_taps``, ``passband_hz``, ``stopband_hz``, ``measured_ripple_db``,
        ``measured_atten_db`` (from the taps), ``measured_end_to_end_ripple_db`` and
        ``measured_end_to_end_atten_db`` (through the engine's whole path, e.g. the
        fast-convolution bank's bin selection and frame overlap), ``group_delay_s``, ``macs_per_input_sample`` (per
        sample entering that stage) and ``macs_per_chain_input_sample``; a missing
        key shows as ``-``, so FFT or other stage dicts fit too. For a chain dict
        a summary follows (rates, MACs per chain input sample, group delay,
        measured and specified ripple and attenuation).

    Returns
    -------
    str
        The table, lines joined by newlines, no trailing newline.
    """
    if isinstance(design_dict, Mapping):
        chain: Mapping[str, Any] | None = design_dict if "stages" in design_dict else None
        rows_in = list(design_dict["stages"]) if chain is not None else [design_dict]
    elif isinstance(design_dict, Sequence) and not isinstance(design_dict, (str, bytes)):
        chain, rows_in = None, list(design_dict)
    else:
        raise ParameterError(
            f"design_dict: expected a chain dict, a stage dict or a list of stage dicts, got {type(design_dict).__name__}"
        )
    table = [[h for h, _, _ in _COLUMNS]]
    for i, row in enumerate(rows_in):
        if not isinstance(row, Mapping):
            raise ParameterError(f"design_dict: stage {i} is a {type(row).__name__}, expected a dict")
        cells = []
        for _, key, fmt in _COLUMNS:
            value = row.get(key)
            if key == "name" and value is None:
                value = row.get("index", i)
            cells.append(_cell(value, fmt))
        table.append(cells)
    widths = [max(len(r[c]) for r in table) for c in range(len(_COLUMNS))]

    def line(cells: list[str]) -> str:
        parts = [cells[0].ljust(widths[0]), cells[1].ljust(widths[1])]
        parts += [cells[c].rjust(widths[c]) for c in range(2, len(cells))]
        return "  ".join(parts).rstrip()

    out = [line(table[0]), "  ".join("-" * w for w in widths)]
    out += [line(r) for r in table[1:]]
    if chain is not None:
        g = chain.get
        out.append("")
        out.append(
            f"chain: {_cell(g('rate_in_hz'), 'hz')} Hz -> {_cell(g('rate_out_hz'), 'hz')} Hz"
            f" (decimation {_cell(g('decimation'), 'd')}), {len(rows_in)} stage(s)"
        )
        out.append(
            f"cost: {_cell(g('macs_per_input_sample'), '.3f')} real MACs per complex input sample;"
            f" group delay {_cell(g('group_delay_s'), 'ms')} ms"
        )
        out.append(
            f"passband 0-{_cell(g('passband_hz'), 'hz')} Hz: ripple {_cell(g('measured_ripple_db'), '.4f')} dB p-p"
            f" (spec {_cell(g('ripple_db'), 'g')});"
            f" from {_cell(g('stopband_hz'), 'hz')} Hz: attenuation {_cell(g('measured_atten_db'), '.2f')} dB"
            f" (spec {_cell(g('atten_db'), 'g')})"
        )
    return "\n".join(out)
