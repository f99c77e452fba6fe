"""Linear filtering kernels in numpy: FIR against a carried history, FFT convolution, polyphase
up-filter-down, and the first-order recursion.

The stages and detectors stream with these instead of ``scipy.signal.lfilter``, ``upfirdn`` and
``fftconvolve`` so that demodulating does not import ``scipy.signal`` (about 0.45 s of start-up:
it loads ``scipy.stats``). Every kernel is vectorised (no loop over samples) and held by the tests
to the scipy.signal routine it stands for.
"""

from __future__ import annotations

import math

import numpy as np
import scipy.fft as sfft

__all__ = ["fir_valid", "fft_convolve_valid", "polyphase_upfirdn", "first_order_recursion"]

_DIRECT_MAX_WORK = 1 << 16  # taps × outputs below which np.convolve beats a transform


def fft_convolve_valid(x: np.ndarray, h: np.ndarray) -> np.ndarray:
    """``numpy.convolve(x, h, "valid")`` of 1-D arrays by one zero-padded FFT (``scipy.signal.fftconvolve``
    with ``mode="valid"``); len(x) >= len(h)."""
    n = x.size + h.size - 1
    nfft = sfft.next_fast_len(n, real=x.dtype.kind != "c" and h.dtype.kind != "c")
    if x.dtype.kind == "c" or h.dtype.kind == "c":
        y = sfft.ifft(sfft.fft(x, nfft) * sfft.fft(h, nfft))
    else:
        y = sfft.irfft(sfft.rfft(x, nfft) * sfft.rfft(h, nfft), nfft)
    return y[h.size - 1 : x.size]


def fir_valid(x: np.ndarray, h: np.ndarray) -> np.ndarray:
    """The ``len(x) − len(h) + 1`` complete outputs of the FIR ``h`` over ``x`` (1-D), directly or by FFT.

    With ``x`` = the last ``len(h) − 1`` inputs followed by a new block this is
    ``scipy.signal.lfilter(h, 1, block, zi)`` with the history as state.
    """
    count = x.size - h.size + 1
    if count <= 0:
        return np.zeros(0, np.result_type(x, h))
    if h.size * count <= _DIRECT_MAX_WORK or h.size <= 16:
        return np.convolve(x, h, mode="valid")
    return fft_convolve_valid(x, h)


def polyphase_upfirdn(h: np.ndarray, buf: np.ndarray, up: int, down: int, first: int, count: int) -> np.ndarray:
    """Outputs ``first .. first+count-1`` of ``scipy.signal.upfirdn(h, buf, up, down, axis=-1)``.

    ``y[m] = Σ_k h[k] u[m·down − k]`` with ``u`` the input zero-stuffed by ``up``
    (inputs outside ``buf`` are zero). Polyphase (only the products with
    non-zero inputs and kept outputs; Crochiere & Rabiner, *Multirate Digital
    Signal Processing*, 1983, ch. 3):

    * ``up == 1`` (decimation): the input, read as rows of ``down`` samples,
      times the reversed taps cut into rows of ``down`` is one matrix product;
      output ``r`` sums ``Q = ceil(N/down)`` entries along a diagonal of it;
    * ``up > 1``: the outputs ``m ≡ c (mod up/g)``, g = gcd(up, down), share a
      branch (``(m·down) mod up``) and step through the input by ``down/g``: for
      each such class, one strided multiply-add per tap of its branch.

    Rows of a 2-D ``buf`` are independent channels. Output dtype ``result_type(h, buf)``.
    """
    rt = np.result_type(h, buf)
    lead = buf.shape[:-1]
    if count <= 0:
        return np.zeros(lead + (0,), rt)
    if up == 1:
        return _decimate(h.astype(rt, copy=False), buf.astype(rt, copy=False), down, first, count)
    n_taps = h.size
    branch_len = -(-n_taps // up)
    hp = np.zeros(branch_len * up + up, rt)
    hp[:n_taps] = h
    t = (first + np.arange(count, dtype=np.int64)) * down
    i_max = t // up  # newest input of each output
    k0 = t - i_max * up  # its tap
    lo = int(i_max[0]) - (branch_len - 1)
    pad_front = max(0, -lo)
    hi = int(i_max[-1]) + 1
    pad_back = max(0, hi - buf.shape[-1])
    xp = buf.astype(rt, copy=False)
    if pad_front or pad_back:
        widths = [(0, 0)] * (buf.ndim - 1) + [(pad_front, pad_back)]
        xp = np.pad(xp, widths)
    idx = i_max + pad_front
    y = np.zeros(lead + (count,), rt)
    # outputs u ≡ c (mod period) share their branch k0 and step through the input by down/gcd: each
    # class is a strided slice times one tap per branch tap (no gathers), summed in the same order
    period = up // math.gcd(up, down)
    stride = down // math.gcd(up, down)
    for c in range(min(period, count)):
        n_c = len(range(c, count, period))
        newest, branch = int(idx[c]), int(k0[c])
        acc = np.zeros(lead + (n_c,), rt)
        for j in range(branch_len):
            first_in = newest - j
            acc += hp[branch + j * up] * xp[..., first_in : first_in + stride * (n_c - 1) + 1 : stride]
        y[..., c::period] = acc
    return y


def _decimate(h: np.ndarray, buf: np.ndarray, down: int, first: int, count: int) -> np.ndarray:
    n_taps = h.size
    q = -(-n_taps // down)
    newest = first * down  # index in buf of the newest input of the first output
    start = newest - (n_taps - 1)  # oldest input the first output reads
    pad_front = max(0, -start)
    rows = count + q - 1
    need = start + pad_front + rows * down  # samples of the padded input the rows span
    pad_back = max(0, need - pad_front - buf.shape[-1])
    x = buf
    if pad_front or pad_back:
        x = np.pad(buf, [(0, 0)] * (buf.ndim - 1) + [(pad_front, pad_back)])
    x = x[..., start + pad_front : start + pad_front + rows * down]
    hr = np.zeros(q * down, h.dtype)
    hr[:n_taps] = h[::-1]
    # y[r] = Σ_k' hr[k'] x[r·down + k'], k' = q_i·down + c: row r + q_i of x times row q_i of hr
    z = x.reshape(x.shape[:-1] + (rows, down)) @ hr.reshape(q, down).T  # (..., rows, q)
    y = z[..., 0:count, 0].copy()
    for i in range(1, q):
        y += z[..., i : i + count, i]
    return y


def first_order_recursion(u: np.ndarray, pole: float, y_prev: complex | float) -> np.ndarray:
    """``y[n] = u[n] + pole·y[n−1]`` (``y[−1] = y_prev``) without a loop over samples.

    Over a sub-block of ``L`` samples the solution is ``y[k] = a^k·(a·y0 + Σ_{i<=k} a^{−i} u[i])``
    (the recursion unrolled: Oppenheim & Schafer, DTSP, §2.5); ``L`` is kept short enough that
    ``|a|^{−L} <= 1e3``, so the cumulative sum loses at most about three digits. The state
    carried between sub-blocks, ``Y_b = Z_b + a^L Y_{b−1}`` (``Z_b`` the zero-state end of
    sub-block b), is a first-order recursion over sub-blocks, run as a loop over sub-blocks.
    Equals ``scipy.signal.lfilter([1], [1, −pole], u, zi=[pole·y_prev])`` to float64 rounding
    (the tests measure it). ``0 <= |pole| < 1``.
    """
    a = float(pole)
    n = u.size
    out_dtype = np.result_type(u, np.float64, type(y_prev))
    if n == 0:
        return np.zeros(0, out_dtype)
    if a == 0.0:
        return np.asarray(u, out_dtype).copy()
    sub = max(1, min(n, int(math.log(1e3) / -math.log(abs(a)))))
    nsub = -(-n // sub)
    padded = np.zeros(nsub * sub, out_dtype)
    padded[:n] = u
    blocks = padded.reshape(nsub, sub)
    k = np.arange(sub, dtype=np.float64)
    grow = a**-k
    decay = a**k
    zero_state = np.cumsum(blocks * grow, axis=1) * decay  # each sub-block started from rest
    # carried state: Y_b = Z_b[-1] + a^sub·Y_{b-1}, over sub-blocks (not samples)
    ends = zero_state[:, -1].tolist()
    a_sub = a**sub
    carry = np.empty(nsub, out_dtype)
    y_last = y_prev
    for b in range(nsub):
        carry[b] = y_last
        y_last = ends[b] + a_sub * y_last
    y = zero_state + carry[:, None] * (a * decay)[None, :]
    return y.reshape(-1)[:n]
