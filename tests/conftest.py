"""Test-suite configuration.

Under CI (``CI`` set in the environment) hypothesis runs derandomized, so a CI run is
reproducible; locally it explores new examples each run.
"""

import os

from hypothesis import settings

settings.register_profile("ci", derandomize=True, deadline=None, print_blob=True)
settings.register_profile("dev", deadline=None)
settings.load_profile("ci" if os.environ.get("CI") else "dev")
