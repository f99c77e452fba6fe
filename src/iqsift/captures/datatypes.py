"""SigMF sample datatypes: parsing names, converting bytes to samples and back.

The SigMF specification (sigmf-spec v1.2, section "Dataset Format") names a
sample format as ``(r|c)(f32|f64|i32|i16|u32|u16)(_le|_be)`` or
``(r|c)(i8|u8)``: real or complex, float / signed / unsigned integer, width in
bits *per component*, byte order. Complex samples are interleaved I then Q.
That makes 28 names in all.

Scaling to full scale follows iqsift's convention (see DEVELOPERS.md): complex
magnitude 1.0 is 0 dBFS; a signed integer ``v`` of ``b`` bits reads as
``v / 2**(b-1)``, an unsigned one as ``(v - 2**(b-1)) / 2**(b-1)``; floats are
taken as they are.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np

from ..errors import CaptureError, ParameterError

__all__ = ["DataType", "parse_datatype", "ALL_DATATYPES"]

_DATATYPE_RE = re.compile(r"^(r|c)(f32|f64|i32|i16|u32|u16|i8|u8)(_le|_be)?$")


@dataclass(frozen=True)
class DataType:
    """One SigMF datatype.

    Attributes
    ----------
    name : str
        The SigMF name, e.g. ``"ci16_le"``.
    is_complex : bool
        Interleaved I/Q (``c``) or real-valued (``r``).
    kind : str
        ``"f"`` float, ``"i"`` signed integer, ``"u"`` unsigned integer.
    bits : int
        Width of one component in bits.
    byteorder : str
        ``"<"`` little endian, ``">"`` big endian, ``"|"`` single byte.
    """

    name: str
    is_complex: bool
    kind: str
    bits: int
    byteorder: str

    @property
    def component_dtype(self) -> np.dtype:
        """numpy dtype of one stored component (I, Q or a real value)."""
        return np.dtype(f"{self.byteorder}{self.kind}{self.bits // 8}")

    @property
    def components(self) -> int:
        """Components per sample: 2 for complex, 1 for real."""
        return 2 if self.is_complex else 1

    @property
    def sample_bytes(self) -> int:
        """Bytes per stored sample (all components)."""
        return self.components * self.bits // 8

    @property
    def is_integer(self) -> bool:
        """True for fixed-point datatypes."""
        return self.kind in "iu"

    @property
    def clip_high(self) -> float:
        """Largest positive component value after scaling (1.0 for floats)."""
        if self.kind == "f":
            return 1.0
        return (2 ** (self.bits - 1) - 1) / 2 ** (self.bits - 1)

    def to_complex64(self, raw: np.ndarray) -> np.ndarray:
        """Scale stored components to complex64 samples (full scale = magnitude 1).

        Parameters
        ----------
        raw : ndarray
            One-dimensional array of ``component_dtype`` holding whole samples.

        Returns
        -------
        ndarray of complex64
            Real datatypes give samples with a zero imaginary part.
        """
        if self.kind == "f" and self.bits == 32 and self.is_complex and raw.dtype == np.dtype("<f4"):
            return raw.view(np.complex64)  # stored exactly as numpy's complex64: no copy
        if self.kind == "f":
            values = raw.astype(np.float32, copy=False)
        else:
            work = np.float64 if self.bits > 16 else np.float32
            values = raw.astype(work)
            half = float(2 ** (self.bits - 1))
            if self.kind == "u":
                values -= half
            values *= 1.0 / half
        if self.is_complex:
            pairs = values.astype(np.float32, copy=False).reshape(-1, 2)
            out = np.empty(pairs.shape[0], dtype=np.complex64)
            out.real = pairs[:, 0]
            out.imag = pairs[:, 1]
            return out
        out = np.zeros(values.shape[0], dtype=np.complex64)
        out.real = values
        return out

    def from_complex(self, samples: np.ndarray) -> tuple[np.ndarray, int]:
        """Convert samples (full scale = magnitude 1) to stored components.

        Integers are rounded to nearest and clipped to the code range.

        Parameters
        ----------
        samples : ndarray
            Complex (or real) samples.

        Returns
        -------
        raw : ndarray
            Interleaved components of ``component_dtype``, ready to write.
        clipped : int
            Number of components that had to be clipped (0 for floats).
        """
        samples = np.asarray(samples)
        if self.is_complex:
            pairs = np.empty((samples.shape[0], 2), dtype=np.float64)
            pairs[:, 0] = samples.real
            pairs[:, 1] = samples.imag if np.iscomplexobj(samples) else 0.0
            values: np.ndarray = pairs.reshape(-1)
        else:
            values = np.asarray(samples.real if np.iscomplexobj(samples) else samples, dtype=np.float64)
        if self.kind == "f":
            return values.astype(self.component_dtype), 0
        half = float(2 ** (self.bits - 1))
        codes = np.rint(values * half)
        low, high = -half, half - 1
        clipped = int(np.count_nonzero((codes < low) | (codes > high)))
        np.clip(codes, low, high, out=codes)
        if self.kind == "u":
            codes += half
        return codes.astype(self.component_dtype), clipped


def parse_datatype(name: str, source: str = "datatype") -> DataType:
    """Parse a SigMF datatype name such as ``"cf32_le"`` or ``"ru8"``.

    Parameters
    ----------
    name : str
        The datatype name.
    source : str
        Where the name came from (a file, ``--format``), for the error message.

    Raises
    ------
    CaptureError
        If the name is not one of the 28 SigMF datatypes (``source`` names a file).
    """
    match = _DATATYPE_RE.match(str(name).strip()) if isinstance(name, str) else None
    if match:
        part, fmt, order = match.groups()
        kind, bits = fmt[0], int(fmt[1:])
        if bits == 8 and order:
            match = None
        elif bits > 8 and not order:
            match = None
    if not match:
        raise _datatype_error(source)(
            f"{source}: unknown datatype {name!r}; SigMF datatypes are (r|c)(f32|f64|i32|i16|u32|u16)(_le|_be) "
            "or (r|c)(i8|u8), e.g. cf32_le, ci16_le, cu8"
        )
    byteorder = "|" if bits == 8 else ("<" if order == "_le" else ">")
    return DataType(name=name.strip(), is_complex=part == "c", kind=kind, bits=bits, byteorder=byteorder)


def _datatype_error(source: str) -> type:
    # a parameter name (``format``) means the caller gave the value; anything else names a file
    return ParameterError if source.isidentifier() else CaptureError


def _all_names() -> tuple[str, ...]:
    names = []
    for part in "rc":
        for fmt in ("f32", "f64", "i32", "i16", "u32", "u16"):
            for order in ("_le", "_be"):
                names.append(f"{part}{fmt}{order}")
        for fmt in ("i8", "u8"):
            names.append(f"{part}{fmt}")
    return tuple(names)


ALL_DATATYPES: tuple[str, ...] = _all_names()
"""The 28 datatype names of the SigMF specification."""
