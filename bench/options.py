"""Command-line options shared by the commands that read captures alike: where the tone is, the FFT
length, how far a tone may move between compared captures, and where the noise floor is taken."""

from __future__ import annotations

from rxbench.dsp.same_signal import DEFAULT_BINS, DEFAULT_PPM
from rxbench.quantities import arg as quantity_arg


def add_tone_reading_options(parser) -> None:
    """The options of every command that compares tones across captures (``loss``, ``ladder``): where
    the tone is, the FFT length, the frequency tolerance between captures and the noise band."""
    parser.add_argument("--near", type=quantity_arg("offset"), metavar="HZ",
                        help="measure the tone near this offset from centre, Hz")
    parser.add_argument("--nperseg", type=int, metavar="N", help="FFT segment length (default: from the capture length)")
    add_drift_option(parser)
    add_noise_band_option(parser)


def add_noise_band_option(parser) -> None:
    """``--noise-band LO HI``: where in the band the noise floor of every capture read is taken."""
    parser.add_argument("--noise-band", type=quantity_arg("offset"), nargs=2, metavar=("LO", "HI"),
                        help="take the noise floor between these offsets from centre, Hz (default: the whole band, "
                             "or near the signals when the floor is not flat)")


def add_drift_option(parser) -> None:
    """``--drift-ppm``: how far compared captures' tones may move apart (see :func:`rxbench.compared.signal_differences`)."""
    parser.add_argument("--drift-ppm", type=float, default=DEFAULT_PPM, metavar="PPM",
                        help="how far the tone may move between captures, ppm of the centre frequency, on top of "
                             f"{DEFAULT_BINS:g} FFT bins (default %(default)g; widen for a dongle still warming up)")
