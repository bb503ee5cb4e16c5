"""rxbench shell: files, the dongle, plans, reports and the command line.

Everything numerical lives in :mod:`dsp`; this package reads, calls ``dsp`` and writes.
"""

__version__ = "0.1.0"
