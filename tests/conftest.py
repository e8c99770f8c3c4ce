"""Test settings shared by every test file.

On CI (the ``CI`` environment variable is set) hypothesis runs derandomized: the same
examples every run, so a green CI is reproducible. Locally it explores new examples each run.
"""

from __future__ import annotations

import os

from hypothesis import settings

settings.register_profile("ci", derandomize=True, deadline=None, print_blob=True)
settings.register_profile("dev", deadline=None)
settings.load_profile("ci" if os.environ.get("CI") else "dev")
