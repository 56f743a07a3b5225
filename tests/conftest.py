"""Shared fixtures. Browser tests: with CI=true a missing browser fails them; otherwise they skip."""

from __future__ import annotations

import os
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))
SAMPLES = ROOT / "sample_data"


def in_ci() -> bool:
    return os.environ.get("CI", "").strip().lower() in ("1", "true", "yes")


@pytest.fixture(scope="session")
def sample_dir() -> Path:
    return SAMPLES


@pytest.fixture()
def fit_service():
    """A fresh dashboard service on its own store (1 GiB, 128 MiB uploads)."""
    from app.service import FitService
    from app.store import DatasetStore

    return FitService(DatasetStore(), upload_limit_bytes=128 * 2**20)


@pytest.fixture()
def sensor(fit_service):
    """(service, dataset info, columns) for the invented sensor calibration sample."""
    from app.service import Columns

    info = fit_service.load_path(SAMPLES / "sensor_calibration.csv")
    return fit_service, info, Columns(info.default_x, info.default_y)


@pytest.fixture(scope="module")
def browser():
    """Debian's headless Chromium for one test module."""
    from browser_support import browser_problem, chromium

    problem = browser_problem()
    if problem:
        if in_ci():
            pytest.fail(f"browser tests must run in CI, but {problem}", pytrace=False)
        pytest.skip(problem)
    from playwright.sync_api import sync_playwright

    with sync_playwright() as p, chromium(p) as b:
        yield b
