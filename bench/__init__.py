"""rxbench shell: files, the dongle, plans, reports and the command line.

Everything numerical lives in :mod:`rxbench.dsp`; this package reads, calls ``dsp`` and writes.

The Python API (:mod:`rxbench.api`) is re-exported here lazily: ``rxbench.read``,
``rxbench.direct_loss``, ... import the shell on first use, so ``import rxbench.dsp`` alone does not.
"""

__version__ = "0.1.0"

#: The API's names (defined in :mod:`rxbench.api`).
__all__ = ["Analysis", "Capture", "CompareResult", "GainMethodResult", "Loss", "LossResult", "NoiseFigureResult",
           "Reading", "Session", "ToneResult", "analyze_session", "compare", "direct_loss", "gain_method",
           "noise_figure", "open_capture", "open_session", "read", "read_paths", "tone"]


def __getattr__(name: str):
    if name in __all__:
        from rxbench import api

        return getattr(api, name)
    raise AttributeError(f"module 'rxbench' has no attribute {name!r}")


def __dir__():
    return sorted(set(globals()) | set(__all__))
