"""Shared test fixtures."""

from __future__ import annotations

import importlib.util
from pathlib import Path

import pytest

SAMPLES = Path(__file__).parents[1] / "sample_soundings"


@pytest.fixture(scope="session")
def demo_model(tmp_path_factory):
    """The demo model file as sample_soundings/make_model.py writes it (invented fields)."""
    spec = importlib.util.spec_from_file_location("make_model", SAMPLES / "make_model.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod.main(tmp_path_factory.mktemp("model") / "demo_model.nc")
