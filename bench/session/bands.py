"""Amateur bands by name, and the name of the quietest ITU-R P.372 prediction."""

from __future__ import annotations


from rxbench.dsp.bands import AMATEUR_BANDS, band_of
from rxbench.methods.external import QUIET_GALACTIC

__all__ = ["AMATEUR_BANDS", "QUIET_GALACTIC", "band_name"]


def band_name(frequency_hz: float | None) -> str:
    """The amateur band holding ``frequency_hz`` ("10 m", :func:`rxbench.dsp.bands.band_of`), or the
    frequency in MHz."""
    if frequency_hz is None:
        return "unknown frequency"
    return band_of(frequency_hz) or f"{frequency_hz / 1e6:.3f} MHz"
