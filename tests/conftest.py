"""Fixtures every test gets: determinism and isolation from the user's own setup."""

from __future__ import annotations

import os

# isort: off
import speccat  # noqa: F401  (before numpy: single-threaded BLAS as in the CLI, DEVELOPERS.md)
import numpy as np
import pytest

# isort: on

os.environ.setdefault("TEXTUAL_ANIMATIONS", "none")


@pytest.fixture(autouse=True)
def _isolated_environment(
    monkeypatch: pytest.MonkeyPatch, tmp_path_factory: pytest.TempPathFactory
) -> None:
    """No user config, no archive from the environment, UTC, C locale, fixed numpy seed."""
    cfg = tmp_path_factory.mktemp("xdg")
    monkeypatch.setenv("XDG_CONFIG_HOME", str(cfg))
    for key in list(os.environ):
        if key.startswith("SPECCAT_") and key != "SPECCAT_TEST_PG_URL":
            monkeypatch.delenv(key)
    monkeypatch.setenv("TZ", "UTC")
    monkeypatch.setenv("LC_ALL", "C.UTF-8")
    monkeypatch.setenv("TEXTUAL_ANIMATIONS", "none")
    np.random.seed(20261202)


@pytest.fixture
def rng() -> np.random.Generator:
    """A seeded generator; tests that draw noise take this, never the global state."""
    return np.random.default_rng(1234)
