"""``rxbench synth OUT``: write a synthetic capture (a tone and/or noise through a simulated dongle).

For trying the tool, for tests and for benchmarks. The data is invented: the file's metadata says so
(``rxbench:simulated``).
"""

from __future__ import annotations

import argparse
from pathlib import Path

import numpy as np

from rxbench.errors import UsageError
from rxbench.files import check_free_space
from rxbench.keys import ROLES
from rxbench.output import add_json_option, emit
from rxbench.recordings import AUDIO_SUFFIXES, DATA_SUFFIX, META_SUFFIX, RAW_FORMATS, SigmfWriter, atomic_path, encode, ENCODINGS
from rxbench.dsp import synth
from rxbench.dsp.units import w_from_dbm
from rxbench.quantities import arg as quantity_arg

#: Samples generated per block, so any length of capture takes flat memory.
_BLOCK = 1 << 20


def add_parser(sub) -> None:
    p = sub.add_parser("synth", help="write a synthetic capture (tone and noise through a simulated dongle)",
                       description="Write a synthetic capture with known truth. Output type by suffix: "
                                   ".sigmf-meta (or none) for SigMF cu8, .cu8/.cs8/.cs16/.cf32 for raw IQ, "
                                   ".wav/.flac for two-channel I/Q audio files.")
    p.add_argument("out", metavar="OUT", help="output file name")
    p.add_argument("--level-dbm", type=quantity_arg("level_dbm"), default=-100.0, metavar="DBM",
                   help="tone level at the dongle's input, dBm (default %(default)g)")
    p.add_argument("--no-tone", action="store_true", help="noise only")
    p.add_argument("--offset", type=quantity_arg("offset"), default=25e3, metavar="HZ", help="tone offset from centre, Hz")
    p.add_argument("--drift", type=quantity_arg("offset"), default=0.0, metavar="HZ", help="tone drift over the capture, Hz")
    p.add_argument("--loss-db", type=quantity_arg("loss_db"), default=0.0, metavar="DB", help="passive loss ahead of the dongle, dB")
    p.add_argument("--enr-db", type=quantity_arg("enr_db"), metavar="DB", help="add a noise source of this ENR, switched on")
    p.add_argument("--rate", type=quantity_arg("sample_rate"), default=2.4e6, metavar="HZ", help="sample rate (default %(default)g)")
    p.add_argument("--duration", type=quantity_arg("duration_s"), default=1.0, metavar="S", help="length, s (default %(default)g)")
    p.add_argument("--center", type=quantity_arg("frequency"), default=28.5e6, metavar="HZ", help="centre frequency (default %(default)g)")
    p.add_argument("--gain-db", type=quantity_arg("gain_db"), default=70.0, help="dongle conversion gain, dBFS per dBm (default %(default)g)")
    p.add_argument("--nf-db", type=quantity_arg("noise_figure_db"), default=6.0, help="dongle noise figure, dB (default %(default)g)")
    p.add_argument("--dc-offset", type=quantity_arg("full_scale"), default=0.01, help="DC offset, full scale (default %(default)g)")
    p.add_argument("--compression-dbfs", type=quantity_arg("dbfs"), metavar="DBFS", help="Rapp saturation level (default: linear)")
    p.add_argument("--seed", type=int, default=1, help="random seed (default %(default)d)")
    p.add_argument("--role", choices=ROLES, help="rxbench:role to record in SigMF metadata")
    p.add_argument("--attenuation-db", type=quantity_arg("attenuation_db"), help="rxbench:attenuation_db to record in SigMF metadata")
    p.add_argument("--overwrite", action="store_true",
                   help="replace OUT if it exists and is a synthetic file (never an input or a recording)")
    p.add_argument("--force", action="store_true", help="write even if OUT would not fit in the free disk space")
    add_json_option(p)
    p.set_defaults(func=run)


def _blocks(args, n_total, rng):
    d = synth.Dongle(gain_db=args.gain_db, noise_figure_db=args.nf_db, dc_offset=args.dc_offset,
                     compression_dbfs=args.compression_dbfs, center_hz=args.center)
    for start in range(0, n_total, _BLOCK):
        n = min(_BLOCK, n_total - start)
        if args.enr_db is not None:
            x = synth.noise_source(n, args.rate, args.enr_db, True, rng)
        else:
            x = synth.thermal_noise(n, args.rate, 290.0, rng)
        if not args.no_tone:
            x = x + synth.tone(n, args.rate, power_w=w_from_dbm(args.level_dbm), offset_hz=args.offset,
                               drift_hz=args.drift, start=start, total=n_total)
        if args.loss_db:
            x = synth.passive_loss(x, args.rate, args.loss_db, rng)
        yield d.receive_cu8(x, args.rate, rng)


def run(args: argparse.Namespace) -> int:
    # The flags' ranges are checked by their argparse types (bench.quantities).
    if not args.no_tone and abs(args.offset) >= args.rate / 2:
        raise UsageError(f"--offset {args.offset:g} Hz lies outside the ±{args.rate / 2:g} Hz band")
    n_total = int(round(args.rate * args.duration))
    if n_total < 1:
        raise UsageError(f"--rate {args.rate:g} x --duration {args.duration:g} s is less than one sample")
    out = args.out
    name = Path(out).name
    if not name or name.startswith(".") or name.lower() in (META_SUFFIX, DATA_SUFFIX):
        raise UsageError(f"{out!r}: give the output a name (not empty, not starting with '.')")
    lower = out.lower()
    suffix = lower.rsplit(".", 1)[-1] if "." in lower else ""
    audio = lower.endswith(AUDIO_SUFFIXES)
    bytes_per_sample = 4 if audio else (ENCODINGS[RAW_FORMATS[suffix]].bytes_per_sample if suffix in RAW_FORMATS else 2)
    warning = check_free_space(Path(out).parent, n_total * bytes_per_sample, what=f"{out} ({n_total} samples)",
                               force=args.force)
    rng = np.random.default_rng(args.seed)
    if audio:
        import soundfile as sf

        if lower.endswith(".flac") and args.rate > 655350:
            raise UsageError(f"FLAC cannot hold {args.rate:g} samples/s (at most 655350): use .wav")
        if args.rate != round(args.rate):
            raise UsageError(f"--rate {args.rate:g}: audio files hold a whole number of samples per second")
        with atomic_path(out, args.overwrite) as tmp:
            fmt = "FLAC" if lower.endswith(".flac") else ("RF64" if n_total * 4 > 2**31 else "WAV")
            with sf.SoundFile(str(tmp), "w", samplerate=int(round(args.rate)), channels=2, format=fmt,
                              subtype="PCM_16") as f:
                for raw in _blocks(args, n_total, rng):
                    f.write(synth.cu8_to_complex(raw).view(np.float32).reshape(-1, 2))
        written = out
    elif suffix in RAW_FORMATS:
        enc = ENCODINGS[RAW_FORMATS[suffix]]
        with atomic_path(out, args.overwrite) as tmp, open(tmp, "wb") as f:
            for raw in _blocks(args, n_total, rng):
                f.write(raw.tobytes() if suffix == "cu8" else encode(synth.cu8_to_complex(raw), enc).tobytes())
        written = out
    else:
        extra = {"simulated": True}
        if args.role:
            extra["role"] = args.role
        if args.attenuation_db is not None:
            extra["attenuation_db"] = args.attenuation_db
        extra["gain_db"] = args.gain_db
        with SigmfWriter(out, sample_rate_hz=args.rate, datatype="cu8", center_hz=args.center, extra=extra,
                         description="synthetic capture (invented data)", overwrite=args.overwrite) as w:
            for raw in _blocks(args, n_total, rng):
                w.write(raw)
        written = str(w.meta_path)
    result = {"written": written, "n_samples": n_total, "sample_rate_hz": args.rate,
              "tone_level_dbm": None if args.no_tone else args.level_dbm - args.loss_db,
              "expected_tone_dbfs": None if args.no_tone else args.level_dbm - args.loss_db + args.gain_db}
    emit(args, result, f"wrote {written}: {n_total} samples at {args.rate:g} Hz (synthetic)",
         [warning] if warning else None)
    return 0
