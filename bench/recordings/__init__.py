"""Reading and writing captures.

Every capture, whatever its file type, is delivered as blocks of complex64 samples at +/-1 full
scale per rail (float32 for one-channel audio), so memory stays flat however long it is:

- SigMF recordings (``.sigmf-meta`` or ``.sigmf-data``): metadata through the ``sigmf`` library,
  samples read in blocks and converted here (cu8 as (u - 127.5)/127.5, the convention the dongle's
  Python binding uses; the sigmf library's own autoscaling would leave a DC term).
- Raw interleaved IQ (``--format cu8|cs8|cs16|cf32 --rate HZ [--center HZ]``), read in blocks.
- WAV/RF64/FLAC through soundfile: two channels are I and Q, one channel is real audio.

Writing is atomic: data and metadata go to temporary names in the destination folder and are
linked into place only when complete; an existing recording is never replaced unless asked; an
interrupted recording is kept under a ``.partial`` name, marked incomplete.

The package, by concept: :mod:`.encoding` (sample types to full scale and back), :mod:`.samples`
(the Capture, block reader, raw IQ and audio), :mod:`.sigmf_reading` (SigMF metadata and segments),
:mod:`.opening` (any capture by name; the command-line options naming captures) and
:mod:`.writing` (atomic writer, partials, salvage). Their public names are re-exported here.
"""

from rxbench.recordings.encoding import ENCODINGS, FLOAT_DATATYPES, RAW_FORMATS, Encoding, decode, encode
from rxbench.recordings.opening import (add_capture_options, capture_from_args, open_capture,
                                        step_capture_from_args)
from rxbench.recordings.samples import (AUDIO_SUFFIXES, BLOCK_SAMPLES, DATA_SUFFIX, META_SUFFIX, Capture,
                                        memory_capture, open_audio, open_raw, sigmf_paths)
from rxbench.recordings.sigmf_reading import open_sigmf
from rxbench.recordings.writing import SigmfWriter, atomic_path, salvage_temporaries, utc_now_iso, write_sigmf

__all__ = ["AUDIO_SUFFIXES", "BLOCK_SAMPLES", "DATA_SUFFIX", "ENCODINGS", "FLOAT_DATATYPES", "META_SUFFIX",
           "RAW_FORMATS", "Capture", "Encoding", "SigmfWriter", "add_capture_options", "atomic_path",
           "capture_from_args", "decode", "encode", "memory_capture", "open_audio", "open_capture", "open_raw",
           "open_sigmf", "salvage_temporaries", "sigmf_paths", "step_capture_from_args", "utc_now_iso",
           "write_sigmf"]
