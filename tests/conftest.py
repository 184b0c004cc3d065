"""Hypothesis profiles for the property tests.

- ``ci`` (default): a few dozen examples per property test, a few hundred in all, so the
  whole suite stays quick on two cores; the same examples every run.
- ``thorough``: thousands of examples per test (tens of thousands in all) for a long run
  before a release: ``PANELFX_THOROUGH=1 python -m pytest tests`` or
  ``python -m pytest tests --hypothesis-profile=thorough``.

Tests that set their own ``max_examples`` with ``@settings`` keep it; the tests of the
correctness kit leave it to the profile.
"""

from __future__ import annotations

import os

from hypothesis import HealthCheck, settings

THOROUGH = os.environ.get("PANELFX_THOROUGH", "").strip() not in ("", "0", "false", "no")

# Generated frames are small, but the derive + slow reference per example can take a few ms.
_common = dict(deadline=None, suppress_health_check=[HealthCheck.too_slow], print_blob=True)
# The default run draws the same examples every time (a change is judged on the same cases
# each run); the thorough run explores new ones.
settings.register_profile("ci", max_examples=40, derandomize=True, **_common)
settings.register_profile("thorough", max_examples=4000, **_common)
settings.load_profile("thorough" if THOROUGH else "ci")
