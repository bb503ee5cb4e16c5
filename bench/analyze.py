"""Renamed :mod:`rxbench.reading` (one thing is called "analyze": the session command). This name
stays importable for code written against it and goes in the next release."""

from rxbench.reading import *  # noqa: F401,F403
from rxbench.compared import *  # noqa: F401,F403  (split from it since)
