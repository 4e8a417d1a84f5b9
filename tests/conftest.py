import os
import sys

from hypothesis import HealthCheck, settings

sys.path.insert(0, os.path.dirname(__file__))

# Hypothesis profiles (see DEVELOPERS.md, Tests). "ci", the default, is derandomized: the same
# examples on every run and every machine, and no example database. "long" is a longer
# randomized run a developer starts by name: `python -m pytest --hypothesis-profile=long
# tests/test_random_circuits.py`, or DERIVE_HYPOTHESIS_PROFILE=long. A test's own
# @settings(max_examples=...) still bounds that test in both; tests/test_random_circuits.py
# takes half the profile's count.
settings.register_profile("ci", max_examples=100, derandomize=True, database=None,
                          deadline=None, print_blob=True)
settings.register_profile("long", max_examples=1000, derandomize=False, deadline=None,
                          print_blob=True, suppress_health_check=[HealthCheck.too_slow])
settings.load_profile(os.environ.get("DERIVE_HYPOTHESIS_PROFILE", "ci"))
