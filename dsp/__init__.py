"""Pure numerics of rxbench: arrays in, numbers or small frozen dataclasses out.

Nothing here opens a file, prints, or imports :mod:`bench`. Powers are linear; dB only at the edges.
Captures are complex64 at +/-1 full scale per rail; frequencies are in Hz.
"""
