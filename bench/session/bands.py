"""Amateur bands by name, and the name of the quietest ITU-R P.372 prediction."""

from __future__ import annotations


from rxbench.dsp.bands import AMATEUR_BANDS
from rxbench.methods.external import QUIET_GALACTIC
from rxbench.style import band_name  # the one label of a band, in the number style

__all__ = ["AMATEUR_BANDS", "QUIET_GALACTIC", "band_name"]
