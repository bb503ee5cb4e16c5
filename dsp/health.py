"""Capture health: clip fraction, DC offset, mean power, and non-finite samples, in one streaming pass."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from rxbench.dsp.parallel import InOrder


@dataclass(frozen=True)
class Health:
    """Health of a capture. ``clip_fraction`` counts samples with either rail at full scale."""

    n_samples: int
    clip_fraction: float
    dc_offset: complex
    power: float
    n_nonfinite: int

    @property
    def dc_offset_dbfs(self) -> float:
        m = abs(self.dc_offset) ** 2
        return float(10 * np.log10(m)) if m > 0 else float("-inf")


#: Blocks smaller than this are measured at once rather than handed to a worker thread.
_INLINE_BELOW = 1 << 16


def _block_statistics(x: np.ndarray, clip_level: float) -> tuple[int, int, complex, float, int]:
    """(samples, clipped samples, sum, sum of |x|^2, non-finite samples) of one block."""
    total = complex(x.sum())  # pairwise summation, in the block's own precision
    power = float(np.vdot(x, x).real)
    nonfinite = 0
    if not (np.isfinite(total) and np.isfinite(power)):
        # Rare path: count the bad samples, then measure the rest.
        finite = np.isfinite(x)
        nonfinite = int(x.size - np.count_nonzero(finite))
        x = x[finite]
        total = complex(x.sum(dtype=np.complex128 if np.iscomplexobj(x) else np.float64))
        power = float(np.vdot(x, x).real)
    clipped = 0
    rails = x.view(x.real.dtype) if np.iscomplexobj(x) else x
    if rails.size and max(-rails.min(), rails.max()) >= clip_level:  # two fast reductions
        at_rail = np.abs(rails) >= clip_level
        clipped = int(np.count_nonzero(at_rail[0::2] | at_rail[1::2] if np.iscomplexobj(x) else at_rail))
    return x.size, clipped, total, power, nonfinite


class HealthAccumulator:
    """Streaming health statistics.

    Parameters
    ----------
    clip_level : float
        Smallest magnitude, per rail, at which a sample counts as clipped (e.g. 127/128 for cs8).
    """

    def __init__(self, clip_level: float = 1.0):
        if not clip_level > 0:
            raise ValueError(f"{clip_level=} must be positive")
        self.clip_level = float(clip_level) * (1 - 1e-6)
        self._n = 0
        self._clipped = 0
        self._sum = 0j
        self._power = 0.0
        self._nonfinite = 0
        self._work = InOrder()

    def update(self, block) -> None:
        """Add a block (its statistics are taken on a worker thread when it is large)."""
        x = np.asarray(block)
        self._work.submit(self._absorb, _block_statistics, x, self.clip_level, inline=x.size < _INLINE_BELOW)

    def _absorb(self, stats: tuple[int, int, complex, float, int]) -> None:
        n, clipped, total, power, nonfinite = stats
        self._n += n
        self._clipped += clipped
        self._sum += total
        self._power += power
        self._nonfinite += nonfinite

    def result(self) -> Health:
        self._work.drain()
        n = max(self._n, 1)
        return Health(
            n_samples=self._n,
            clip_fraction=self._clipped / n,
            dc_offset=self._sum / n,
            power=self._power / n,
            n_nonfinite=self._nonfinite,
        )
