"""The measurement methods: one module per method, each a function from readings and settings to a
frozen result (the numbers, the uncertainty budget, the warnings, and which captures and settings
gave them). ``to_dict()`` on a result is the one JSON vocabulary of that measurement.

The commands (``rxbench loss``, ``ladder``, ...) parse flags, read captures, call a method and
render its result; a session groups its captures by role and calls the same method; the report
reads the result objects. A method raises :class:`rxbench.errors.MeasurementError` when the
readings cannot give its number; a session turns that into a warning.

- :mod:`.common`: the coverage factor, budget lines as JSON, pooled tones, impedance-mismatch terms
- :mod:`.loss`: direct and substitution insertion loss
- :mod:`.ladder`: the ladder check
- :mod:`.external`, :mod:`.snr_cost`: external noise (excess, knee) and what a loss costs
- :mod:`.compare`: the on-air A/B comparison of two receive paths
"""

from rxbench.methods.common import COVERAGE_FACTOR, PooledTone, pool
from rxbench.methods.ladder import LadderResult, ladder_check
from rxbench.methods.loss import LossResult, direct_loss, substitution_loss

__all__ = ["COVERAGE_FACTOR", "LadderResult", "LossResult", "PooledTone", "direct_loss", "ladder_check", "pool",
           "substitution_loss"]
