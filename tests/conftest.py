"""Test configuration: under CI (CI=true) hypothesis runs derandomised, so a run is reproducible;
locally it explores new examples each run."""
import os

from hypothesis import settings

settings.register_profile("ci", derandomize=True, print_blob=True)
if os.environ.get("CI"):
    settings.load_profile("ci")
