"""Shared test helpers."""

from pathlib import Path

import pytest

NETLIB = Path(__file__).resolve().parents[1] / "calib" / "data" / "netlib"


@pytest.fixture
def netlib_dir() -> Path:
    return NETLIB
