"""Mirror images: emissions that are a stronger emission's image through the receiver's IQ imbalance.

A receiver whose I and Q paths differ in gain and phase records, besides a signal x, a weak copy of
its complex conjugate: r = μ·x + ν·x* (Tarighat, Bagheri & Sayed, IEEE Trans. Signal Processing
53(8), 2005). The copy is the spectrum mirrored about the centre (0 Hz offset), an emission at −f for
every emission at +f, weaker by the image rejection ratio IRR = 10·log10(|μ|²/|ν|²), the same for
every signal when the imbalance does not depend on frequency. The capture's IRR is estimated from its
second-order moments (:mod:`iqsift.captures.stats`, as ``iqsift info`` reports it).

An emission is taken for the image of another when

* its offset is the other's negated, within :data:`MIRROR_BINS` detection bins (both are measured on
  the same spectrum, each good to about a bin);
* it mirrors the other's kind: the same detector, except that an upper sideband's image is a lower one;
* it is weaker by the capture's IRR within ±:data:`LEVEL_TOLERANCE_DB`. A genuine signal in the mirror
  position sits, added to the image, at any level; a frequency-dependent imbalance (filters that differ
  across the band) moves the image a few dB from the estimate (common practice: 6 dB).

The images are left out of the emissions (and so out of the plan) and listed apart, each naming the
emission it mirrors (``image_of``, that emission's index) with a note.
"""

from __future__ import annotations

import dataclasses

from .results import DetectedEmission

__all__ = ["LEVEL_TOLERANCE_DB", "MIRROR_BINS", "split_images"]

MIRROR_BINS = 3.0
"""Largest |offset + mirrored offset|, in detection bins, for a mirror image."""

LEVEL_TOLERANCE_DB = 6.0
"""Largest difference (dB) between the level below the stronger emission and the capture's IRR."""

_MIRRORED_MODE = {"usb": "lsb", "lsb": "usb"}


def _is_image(weak: DetectedEmission, strong: DetectedEmission, irr_db: float, tol_hz: float) -> bool:
    if abs(weak.offset_hz + strong.offset_hz) > tol_hz or strong.offset_hz == 0:
        return False
    if weak.mode != _MIRRORED_MODE.get(strong.mode, strong.mode):
        return False
    below_db = strong.level_dbfs - weak.level_dbfs
    return abs(below_db - irr_db) <= LEVEL_TOLERANCE_DB


def split_images(emissions: list[DetectedEmission], image_rejection_db: float | None,
                 bin_width_hz: float) -> tuple[list[DetectedEmission], list[DetectedEmission]]:
    """The emissions without mirror images (renumbered from 1), and the images (``image_of`` set).

    Parameters
    ----------
    emissions : list of DetectedEmission
        In order of frequency, as the analysis found them.
    image_rejection_db : float or None
        The capture's estimated image rejection ratio (dB); None (no imbalance measurable, or a real
        capture): no emission is taken for an image.
    bin_width_hz : float
        Detection bin width (Hz).
    """
    if image_rejection_db is None or len(emissions) < 2:
        return list(emissions), []
    tol_hz = MIRROR_BINS * bin_width_hz
    mirrors: dict[int, DetectedEmission] = {}  # id of an image -> the emission it mirrors
    genuine: list[DetectedEmission] = []
    for weak in sorted(emissions, key=lambda e: e.level_dbfs, reverse=True):  # the stronger ones decided first
        candidates = [e for e in genuine if _is_image(weak, e, image_rejection_db, tol_hz)]
        if candidates:
            mirrors[id(weak)] = max(candidates, key=lambda e: e.level_dbfs)
        else:
            genuine.append(weak)
    kept = [e for e in emissions if id(e) not in mirrors]
    renumbered = {id(e): dataclasses.replace(e, index=i) for i, e in enumerate(kept, start=1)}
    images = []
    for weak in emissions:
        if id(weak) not in mirrors:
            continue
        parent = renumbered[id(mirrors[id(weak)])]
        below_db = parent.level_dbfs - weak.level_dbfs
        where = (f"{parent.frequency_hz / 1e6:.6f} MHz" if abs(parent.frequency_hz) >= 1e6
                 else f"{parent.frequency_hz:.1f} Hz")
        note = (f"mirror image of #{parent.index} ({where}) about the centre: "
                f"{below_db:.1f} dB below it, the capture's image rejection is {image_rejection_db:.1f} dB "
                "(IQ imbalance); left out of the plan")
        images.append(dataclasses.replace(weak, image_of=parent.index, note=note))
    return list(renumbered.values()), images
