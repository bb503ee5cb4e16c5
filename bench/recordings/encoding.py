"""Sample encodings: how each stored sample type maps to full scale, and back.

Every capture is delivered as complex64 at +/-1 full scale per rail (float32 for one-channel audio);
cu8 as (u - 127.5)/127.5, the convention the dongle's Python binding uses.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

@dataclass(frozen=True)
class Encoding:
    """How one sample type maps to full scale: value = (code - offset) / scale."""

    component: str  # numpy dtype of one rail
    is_complex: bool
    offset: float
    scale: float
    clip_level: float  # per-rail magnitude (full-scale units) at which a sample sits on a rail

    @property
    def bytes_per_sample(self) -> int:
        return np.dtype(self.component).itemsize * (2 if self.is_complex else 1)


#: SigMF datatypes rxbench reads (little-endian only).
ENCODINGS: dict[str, Encoding] = {
    "cu8": Encoding("u1", True, 127.5, 127.5, 1.0),
    "ci8": Encoding("i1", True, 0.0, 128.0, 127 / 128),
    "ci16_le": Encoding("<i2", True, 0.0, 32768.0, 32767 / 32768),
    "cf32_le": Encoding("<f4", True, 0.0, 1.0, 1.0),
    "ru8": Encoding("u1", False, 127.5, 127.5, 1.0),
    "ri8": Encoding("i1", False, 0.0, 128.0, 127 / 128),
    "ri16_le": Encoding("<i2", False, 0.0, 32768.0, 32767 / 32768),
    "rf32_le": Encoding("<f4", False, 0.0, 1.0, 1.0),
}
#: Datatypes whose samples are floats (``audio-float``: a WAV/FLAC of float samples).
FLOAT_DATATYPES = ("cf32_le", "rf32_le", "audio-float")
#: Raw-file ``--format`` names and the SigMF datatype each stands for.
RAW_FORMATS = {"cu8": "cu8", "cs8": "ci8", "cs16": "ci16_le", "cf32": "cf32_le"}


def decode(raw: np.ndarray, encoding: Encoding) -> np.ndarray:
    """Codes (one rail per element) -> complex64 (or float32 for real) at +/-1 full scale, always in a
    new array (readers reuse their buffer of codes)."""
    if encoding.offset:
        x = np.subtract(raw, np.float32(encoding.offset), dtype=np.float32)
    else:
        x = raw.astype(np.float32)
    if encoding.scale != 1.0:
        x *= np.float32(1.0 / encoding.scale)
    return x.view(np.complex64) if encoding.is_complex else x


def encode(samples: np.ndarray, encoding: Encoding) -> np.ndarray:
    """Full-scale samples -> codes of ``encoding`` (rounded and clipped to the rails)."""
    x = np.asarray(samples)
    rails = np.empty(x.size * (2 if encoding.is_complex else 1), dtype=np.float64)
    if encoding.is_complex:
        rails[0::2], rails[1::2] = x.real, x.imag
    else:
        rails[:] = np.real(x)
    dt = np.dtype(encoding.component)
    if dt.kind == "f":
        return rails.astype(dt)
    info = np.iinfo(dt)
    return np.clip(np.rint(rails * encoding.scale + encoding.offset), info.min, info.max).astype(dt)
