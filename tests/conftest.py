"""Shared test fixtures and the hypothesis profiles."""

from __future__ import annotations

import importlib.util
import os
from pathlib import Path

import pytest

SAMPLES = Path(__file__).parents[1] / "sample_soundings"

try:  # hypothesis is a test dependency; the fixtures below do not need it
    from hypothesis import HealthCheck, settings
except ImportError:  # pragma: no cover
    settings = None

if settings is not None:
    # CI (CI=true) replays the same examples on every run, so a red property test is red again on a re-run and a
    # green one stays green; print_blob gives the reproduce-this-failure line. The shared 2-core runner makes
    # timings noisy, so CI sets no deadline and skips the timing-only health check. Locally ("dev") the search
    # stays random and keeps its example database, to keep finding new cases. HYPOTHESIS_PROFILE overrides both.
    # Both start from hypothesis's own defaults, not from the profile hypothesis itself picked at import.
    _base = settings.get_profile("default")
    settings.register_profile("ci", parent=_base, derandomize=True, max_examples=100, deadline=None, print_blob=True,
                              database=None, suppress_health_check=[HealthCheck.too_slow])
    settings.register_profile("dev", parent=_base, derandomize=False, print_blob=True)
    _ci = os.environ.get("CI", "").strip().lower() not in ("", "0", "false", "no")
    settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE") or ("ci" if _ci else "dev"))


@pytest.fixture(scope="session")
def demo_model(tmp_path_factory):
    """The demo model file as sample_soundings/make_model.py writes it (invented fields)."""
    spec = importlib.util.spec_from_file_location("make_model", SAMPLES / "make_model.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod.main(tmp_path_factory.mktemp("model") / "demo_model.nc")
