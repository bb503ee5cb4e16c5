"""A session folder and everything its captures support.

A session is a folder of SigMF captures (written by ``rxbench capture`` or by hand), each carrying
its role (``thru``, ``dut``, ``step``, ``hot``, ``cold``, ``antenna``, ``load``), attenuator
setting, gain and step name in the ``rxbench:`` metadata. :func:`open_session` finds the captures
and sorts out the ones that cannot be used (incomplete, unreadable, without a role);
:func:`analyze_session` reads every capture once and runs whatever the roles present allow:

- tone readings of every ``thru``, ``dut`` and ``step`` capture;
- the ladder check of the ``step`` captures (three or more attenuator settings);
- direct insertion loss (``thru`` and ``dut`` at the same attenuator setting; a thru after the DUT
  removes linear drift) and substitution loss (the ``dut`` against the ladder);
- the Y-factor noise figure from ``hot``/``cold`` captures, and with hot/cold captures taken
  through the DUT, the DUT's insertion loss and noise figure per sub-band, stitched across centre
  frequencies into curves;
- the external-noise excess from ``antenna`` against ``load`` captures (a knee fit when there are
  antenna captures through several attenuator settings);
- the SNR cost of the measured loss on each band where the excess was measured.

Captures are compared only when they were taken alike: same sample rate, same kind of samples,
same tuning and same gain. Anything else is left out with a warning that says why, never turned
into a number. The analysis is plain data (dicts and lists, JSON-ready), plus the spectra kept
for the plots.

The numerics are all in :mod:`dsp`; this module only groups captures and calls it.

The package, by concept: :mod:`.folder` (finding the captures and what their metadata says),
:mod:`.bands` (amateur band names), :mod:`.grouping` (which captures may be compared, grouped by
tuning), :mod:`.tone` (ladder, direct and substitution loss), :mod:`.noise_source` (Y-factor noise
figure and the DUT's curve), :mod:`.external` (excess, knee, SNR cost) and :mod:`.analysis` (the
whole analysis and its JSON view).
"""

from rxbench.session.analysis import N_SUB_BANDS, Analysis, analyze_session
from rxbench.session.bands import AMATEUR_BANDS, QUIET_GALACTIC, band_name
from rxbench.session.external import loss_at
from rxbench.session.folder import NOISE_ROLES, TONE_ROLES, Entry, Session, open_session

__all__ = ["AMATEUR_BANDS", "N_SUB_BANDS", "NOISE_ROLES", "QUIET_GALACTIC", "TONE_ROLES", "Analysis",
           "Entry", "Session", "analyze_session", "band_name", "loss_at", "open_session"]


