"""Shared test settings: hypothesis profiles (``HYPOTHESIS_PROFILE=ci|thorough``)."""

import os

from hypothesis import settings

# ci: bounded and free of wall-clock deadlines (CI machines vary); thorough: a long local run.
settings.register_profile("ci", deadline=None, max_examples=60, derandomize=True)
settings.register_profile("thorough", deadline=None, max_examples=2000)
settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "ci"))
