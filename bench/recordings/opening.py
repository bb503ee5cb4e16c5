"""Opening any capture by its name (SigMF, raw IQ, audio: the file type chosen from the suffix or
``--format``), and the command-line options and ``DB=CAPTURE`` arguments that name captures.
"""

from __future__ import annotations

import argparse
from dataclasses import replace
from pathlib import Path

from rxbench import keys
from rxbench.errors import CaptureError, UsageError
from rxbench.files import check_regular
from rxbench.quantities import QuantityError, arg as quantity_arg, check as check_quantity
from rxbench.recordings.encoding import RAW_FORMATS
from rxbench.recordings.samples import AUDIO_SUFFIXES, DATA_SUFFIX, META_SUFFIX, Capture, open_audio, open_raw
from rxbench.recordings.sigmf_reading import open_sigmf

def open_capture(path, *, fmt: str | None = None, rate_hz: float | None = None,
                 center_hz: float | None = None) -> Capture:
    """Open any capture rxbench reads; bad input raises :class:`CaptureError` naming the file.

    ``fmt``/``rate_hz`` are needed for raw IQ (a ``.cu8``, ``.cs8``, ``.cs16`` or ``.cf32`` suffix
    stands for ``fmt``); ``center_hz`` supplies a centre frequency where the file has none.
    """
    path = Path(path)
    name = path.name.lower()
    if name.endswith((META_SUFFIX, DATA_SUFFIX)):
        if fmt is not None:
            raise CaptureError(path, "--format applies to raw IQ files, not to SigMF recordings")
        cap = open_sigmf(path)
        if center_hz is not None and cap.center_hz is None:
            cap = replace(cap, center_hz=center_hz)
        return cap
    check_regular(path, "capture")
    if name.endswith(AUDIO_SUFFIXES) and fmt is None:
        return open_audio(path, center_hz)
    if fmt is None:
        fmt = path.suffix.lower().lstrip(".")
        if fmt not in RAW_FORMATS:
            raise CaptureError(path, "unknown file type: for raw IQ give --format cu8|cs8|cs16|cf32 and --rate HZ")
    return open_raw(path, fmt, rate_hz, center_hz)


def add_capture_options(parser: argparse.ArgumentParser) -> None:
    """``--format``, ``--rate`` and ``--center`` for raw IQ (and audio) captures."""
    g = parser.add_argument_group("raw IQ captures")
    g.add_argument("--format", choices=sorted(RAW_FORMATS), help="sample format of raw IQ files")
    g.add_argument("--rate", type=quantity_arg("sample_rate"), metavar="HZ", help="sample rate of raw IQ files, Hz")
    g.add_argument("--center", type=quantity_arg("frequency"), metavar="HZ", help="centre frequency where the file gives none, Hz")


def capture_from_args(path, args: argparse.Namespace) -> Capture:
    """Open ``path`` with the raw-IQ options of ``args`` (see :func:`add_capture_options`)."""
    return open_capture(path, fmt=getattr(args, "format", None), rate_hz=getattr(args, "rate", None),
                        center_hz=getattr(args, "center", None))


def step_capture_from_args(text: str, args: argparse.Namespace, option: str = "--step"):
    """``DB=CAPTURE`` (or ``CAPTURE`` whose metadata gives ``rxbench:attenuation_db``) -> (dB, Capture)."""
    db = None
    path = text
    if "=" in text:
        head, tail = text.split("=", 1)
        try:
            db = float(head)
            path = tail
        except ValueError:
            pass
    cap = capture_from_args(path, args)
    meta_db = cap.extra.get(keys.ATTENUATION_DB)
    if db is None:
        if meta_db is None:
            raise UsageError(f"{option} {text}: give the attenuator setting as DB=CAPTURE "
                             "(the capture's metadata has no attenuation)")
        try:
            db = check_quantity(meta_db, "attenuation_db", f"{keys.NAMESPACE}:{keys.ATTENUATION_DB}")
        except QuantityError as exc:
            raise UsageError(f"{cap.path}: {exc}") from None
    else:
        try:
            db = check_quantity(db, "attenuation_db", f"{option} {text}")
        except QuantityError as exc:
            raise UsageError(str(exc)) from None
    return db, cap
