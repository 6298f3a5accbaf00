"""Test-wide settings.

Property tests (hypothesis) explore new random examples on every local run. On the CI
machine (`.ci/run` sets ``DCNET_HYPOTHESIS_PROFILE=ci``) they draw a fixed, reproducible
set instead, so that a landing is judged on the same examples every time; the long
exploratory campaigns are run by hand (``bench/fuzz_run.py``, figures in bench/RESULTS.md).
"""

import os

from hypothesis import settings

settings.register_profile("ci", derandomize=True, deadline=None, print_blob=True)
settings.register_profile("explore", deadline=None)
settings.load_profile(os.environ.get("DCNET_HYPOTHESIS_PROFILE", "explore"))
