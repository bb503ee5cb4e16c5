"""Running a plan into a session folder.

A session is a folder holding:

- one SigMF recording per capture, raw cu8 as the dongle delivers it, named ``NN-STEP`` (``NN`` the
  capture's position in the plan); its metadata carries, under the ``rxbench:`` extension namespace,
  ``role``, ``step``, ``repeat``, ``attenuation_db``, ``gain_db``, ``with_dut``, ``ppm``,
  ``generator_dbm`` and ``tone_offset_hz`` (tone roles, when known), ``enr_db`` and ``u_enr_db``
  (hot/cold), ``attenuator_tolerance_db``, ``devices`` (a back-to-back pair: 2), ``device`` (the
  step's device label, when named), ``dropped_samples``
  and ``simulated``; ``core:datetime`` is the capture's start;
- ``plan.toml``, the plan's text as it was run;
- ``log.txt``, one timestamped line per event (appended, never rewritten);
- ``NN-STEP.partial.sigmf-*``: what an interrupted capture had, marked ``rxbench:incomplete``;
- ``.replaced/``: earlier recordings of steps captured again with ``--redo`` (never deleted).

Running a plan into an existing session resumes it: captures already there are kept and skipped.
Nothing is ever overwritten, and nothing appears under a final name before it is complete.

The package, by concept: :mod:`.guards` (input level and bias tee, before anything is captured),
:mod:`.folder` (the session folder: plan copy, log, recordings moved aside, what is kept) and
:mod:`.run` (prompts, captures, checks); their public names are re-exported here.
"""

from rxbench.capture.folder import (LOG_NAME, PLAN_NAME, REPLACED_DIR, plan_bytes, prepare_session, round_up_512,
                                    verify_kept)
from rxbench.capture.guards import (CLIP_MARGIN_DB, DAMAGE_DBM, REFUSE_ABOVE_DBM, UNKNOWN_CLIP_WARN_DBM,
                                    check_bias_tee, check_levels)
from rxbench.capture.run import SessionRun, drift_partners, run_session, stdin_prompt

__all__ = ["CLIP_MARGIN_DB", "DAMAGE_DBM", "LOG_NAME", "PLAN_NAME", "REFUSE_ABOVE_DBM", "REPLACED_DIR",
           "UNKNOWN_CLIP_WARN_DBM", "SessionRun", "check_bias_tee", "check_levels", "drift_partners", "plan_bytes",
           "prepare_session", "round_up_512", "run_session", "stdin_prompt", "verify_kept"]
