"""The attenuator ladder: its readings checked, and the ladder check itself.

A *ladder* is a set of thru readings (dBFS) taken at known attenuator settings (dB). Everything here
works on dB readings and their standard uncertainties (dB) as arrays; reading captures is the
shell's job.

:func:`check_ladder` compares every step with its nominal value against a robust reference, and
separates the attenuator (a step off on its own) from the dongle (compression at the top, noise at
the bottom), giving the dongle's usable linear range. :func:`ladder_arrays` is the one check of a
ladder's arrays, shared with the substitution loss (:mod:`dsp.loss`).

References
----------
Kaylie, H., "Calibration of attenuators by the substitution method", IEEE Trans. Instrum. Meas.
15(4), 1966 [from memory]. Warner, F. L., *Microwave Attenuation Measurement*, Peregrinus, 1977
[from memory].
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from rxbench.dsp.uncertainty import DEFAULT_K


#: Default tolerance of a ladder step before it is flagged, dB (common practice for a bench step
#: attenuator of modest grade).
DEFAULT_TOLERANCE_DB = 0.3
#: Default shortfall at the top of a ladder that counts as dongle compression, dB.
DEFAULT_LINEARITY_DB = 0.1

COMPRESSED = "compressed"
LINEAR = "linear"
NOISE_LIMITED = "noise-limited"


def as_1d(name, value):
    """``value`` as a 1-D float array (a scalar becomes one element); ValueError naming ``name`` otherwise."""
    a = np.atleast_1d(np.asarray(value, dtype=float))
    if a.ndim != 1:
        raise ValueError(f"{name} must be one-dimensional, got shape {a.shape}")
    return a


def ladder_arrays(nominal_db, reading_dbfs, u_reading_db, *, allow_missing):
    """A ladder's arrays checked (alike, finite distinct settings, u >= 0; readings finite unless
    ``allow_missing``) and sorted by setting: (nominal, reading, u, order)."""
    nominal = as_1d("nominal_db", nominal_db)
    reading = as_1d("reading_dbfs", reading_dbfs)
    u = as_1d("u_reading_db", u_reading_db)
    if not nominal.shape == reading.shape == u.shape:
        raise ValueError(
            f"nominal_db, reading_dbfs and u_reading_db differ in length: "
            f"{nominal.size}, {reading.size}, {u.size}"
        )
    if np.any(~np.isfinite(nominal)):
        raise ValueError(f"nominal step values must be finite, got {nominal.tolist()}")
    if np.unique(nominal).size != nominal.size:
        raise ValueError(f"nominal step values must be distinct, got {nominal.tolist()}")
    if np.any(u < 0):
        raise ValueError(f"standard uncertainties must be >= 0, got {u.tolist()}")
    missing = ~np.isfinite(reading) | ~np.isfinite(u)
    if not allow_missing and np.any(missing):
        raise ValueError(f"step(s) {nominal[missing].tolist()} dB have no finite reading")
    order = np.argsort(nominal)
    return nominal[order], reading[order], u[order], order


# --------------------------------------------------------------------------------------------
# Ladder check


@dataclass(frozen=True)
class LadderCheck:
    """The result of :func:`check_ladder`; arrays are sorted by nominal attenuation, ascending.

    Attributes
    ----------
    nominal_db, reading_dbfs, u_reading_db : ndarray
        The steps as given (sorted), dB / dBFS / dB.
    order : ndarray of int
        Indices that sorted the input (``nominal_db == input_nominal[order]``).
    measured_db : ndarray
        Attenuation of each step as measured against the reference, ``offset - reading``, dB.
    error_db, u_error_db : ndarray
        ``measured - nominal`` and its standard uncertainty, dB (positive: more loss than nominal,
        or a reading that falls short, as compression does).
    region : tuple of str
        Per step: ``"compressed"`` (top of the ladder, dongle short of the line),
        ``"linear"`` or ``"noise-limited"`` (k*u of the reading exceeds the tolerance).
    flagged : ndarray of bool
        A linear-region step whose |error| exceeds the tolerance: the attenuator, not the dongle.
    offset_dbfs, u_offset_db : float
        The reference: the reading the line predicts at 0 dB attenuation.
    reference : str
        ``"median"`` or ``"step <x> dB"``.
    compression_db : float
        Shortfall of the topmost step when compressed, else 0, dB.
    usable_top_db, usable_bottom_db : float
        Smallest and largest nominal attenuation of the linear region (nan if none).
    usable_range_db : float
        ``usable_bottom_db - usable_top_db``: the span of input level over which the dongle read
        linearly within the linearity limit, dB.
    top_limited_by, bottom_limited_by : str
        ``"compression"`` / ``"noise"`` when the dongle ends the linear region, ``"ladder"`` when the
        ladder ends first (then the usable range is a lower bound).
    tolerance_db, linearity_db, k : float
        The limits used.
    """

    nominal_db: np.ndarray
    reading_dbfs: np.ndarray
    u_reading_db: np.ndarray
    order: np.ndarray
    measured_db: np.ndarray
    error_db: np.ndarray
    u_error_db: np.ndarray
    region: tuple
    flagged: np.ndarray
    offset_dbfs: float
    u_offset_db: float
    reference: str
    compression_db: float
    usable_top_db: float
    usable_bottom_db: float
    usable_range_db: float
    top_limited_by: str
    bottom_limited_by: str
    tolerance_db: float
    linearity_db: float
    k: float


def _compressed_from_top(error, u_error, usable, linearity_db, k):
    """Steps at the top whose shortfall exceeds the limit and does not grow going down."""
    compressed = np.zeros(error.size, dtype=bool)
    for i in range(error.size):
        if not usable[i]:
            break
        if error[i] <= max(linearity_db, k * u_error[i]):
            break
        if i > 0 and error[i] > error[i - 1] + k * math.hypot(u_error[i], u_error[i - 1]):
            break  # shortfall grows going down: not compression
        compressed[i] = True
    return compressed


def check_ladder(nominal_db, reading_dbfs, u_reading_db, *, tolerance_db=DEFAULT_TOLERANCE_DB,
                 linearity_db=DEFAULT_LINEARITY_DB, reference_db=None, k=DEFAULT_K):
    """Check an attenuator ladder step by step and find the dongle's linear range.

    Parameters
    ----------
    nominal_db : array_like
        Nominal attenuator settings, dB (distinct; any order).
    reading_dbfs : array_like
        Tone reading at each setting, dBFS; nan or -inf where no tone could be read.
    u_reading_db : array_like
        Standard uncertainty of each reading, dB.
    tolerance_db : float
        A step whose |error| exceeds this is flagged; a step whose reading's expanded uncertainty
        (k*u) exceeds it is noise-limited (its accuracy cannot be stated to the tolerance).
    linearity_db : float
        A shortfall at the top of the ladder larger than this (and than k*u) is compression.
    reference_db : float, optional
        Reference the errors to this step instead of the robust median.
    k : float
        Coverage factor for the noise and compression tests.

    Returns
    -------
    LadderCheck

    Notes
    -----
    A linear dongle reads r_i = r_0 - A_i. Each step gives an estimate r_i + A_i of r_0; the
    reference r_0 is their median over the steps that are neither noise-limited nor compressed
    (so one bad step cannot move it), or the chosen step's. Then measured_i = r_0 - r_i and
    error_i = measured_i - A_i = r_0 - (r_i + A_i). Compression is recognised from the top: steps
    whose shortfall exceeds max(linearity, k*u) and does not grow going down the ladder. The
    standard uncertainty of a median of m readings of equal u is taken as sqrt(pi/2)*u/sqrt(m)
    (the asymptotic efficiency of the median of normal data; from memory, e.g. Kenney & Keeping,
    *Mathematics of Statistics*). A single off step at the very top cannot be told from
    compression; check it with a second ladder at a lower generator level.

    References
    ----------
    Kaylie 1966; Warner 1977 (substitution and attenuator calibration) [from memory].
    """
    if not tolerance_db > 0 or not linearity_db >= 0 or not k > 0:
        raise ValueError(f"need tolerance_db > 0, linearity_db >= 0, k > 0; got "
                         f"{tolerance_db=}, {linearity_db=}, {k=}")
    nominal, reading, u, order = ladder_arrays(nominal_db, reading_dbfs, u_reading_db,
                                                allow_missing=True)
    if nominal.size < 3:
        raise ValueError(f"a ladder check needs at least 3 steps, got {nominal.size}")
    finite = np.isfinite(reading) & np.isfinite(u)
    noise = ~finite | (k * np.where(finite, u, np.inf) > tolerance_db)
    usable = ~noise
    if not np.any(usable):
        raise ValueError("every step is noise-limited: no step can be read to "
                         f"{tolerance_db} dB (k*u of the readings: {(k * u).tolist()})")
    estimates = np.where(finite, reading + nominal, np.nan)
    if reference_db is not None:
        hit = np.flatnonzero(np.isclose(nominal, reference_db))
        if hit.size != 1:
            raise ValueError(f"reference step {reference_db} dB is not one of the steps "
                             f"{nominal.tolist()}")
        if not usable[hit[0]]:
            raise ValueError(f"reference step {reference_db} dB is noise-limited")

    compressed = np.zeros(nominal.size, dtype=bool)
    for _ in range(4):
        linear = usable & ~compressed
        if reference_db is not None:
            offset, u_offset, ref_name = estimates[hit[0]], u[hit[0]], f"step {nominal[hit[0]]:g} dB"
        else:
            offset = float(np.median(estimates[linear]))
            m = int(linear.sum())
            u_offset = math.sqrt(math.pi / 2) * math.sqrt(np.mean(u[linear] ** 2) / m)
            ref_name = "median"
        error = offset - estimates
        u_error = np.sqrt(np.where(finite, u, 0.0) ** 2 + u_offset**2)
        new = _compressed_from_top(error, u_error, usable, linearity_db, k)
        if reference_db is not None:
            new[hit[0]:] = False
            new &= np.cumprod(new).astype(bool)
        if np.array_equal(new, compressed):
            break
        compressed = new
    linear = usable & ~compressed
    if not np.any(linear):
        raise ValueError("no step of the ladder is in the dongle's linear range")

    region = tuple(NOISE_LIMITED if noise[i] else COMPRESSED if compressed[i] else LINEAR
                   for i in range(nominal.size))
    flagged = linear & (np.abs(error) > tolerance_db)
    lin_idx = np.flatnonzero(linear)
    top, bottom = lin_idx[0], lin_idx[-1]
    return LadderCheck(
        nominal_db=nominal, reading_dbfs=reading, u_reading_db=u, order=order,
        measured_db=offset - reading, error_db=error, u_error_db=u_error, region=region,
        flagged=flagged, offset_dbfs=float(offset), u_offset_db=float(u_offset),
        reference=ref_name, compression_db=float(error[0]) if compressed[0] else 0.0,
        usable_top_db=float(nominal[top]), usable_bottom_db=float(nominal[bottom]),
        usable_range_db=float(nominal[bottom] - nominal[top]),
        top_limited_by="compression" if top > 0 and compressed[top - 1] else "ladder",
        bottom_limited_by="noise" if bottom < nominal.size - 1 else "ladder",
        tolerance_db=float(tolerance_db), linearity_db=float(linearity_db), k=float(k),
    )
