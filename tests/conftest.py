"""Shared test fixtures."""

from __future__ import annotations

import os

import pytest

os.environ.setdefault("MPLBACKEND", "Agg")


def pytest_collection_modifyitems(config, items):
    """Leave the dedicated ``fuzz`` run out of the default suite; ``-m fuzz`` selects it."""
    if "fuzz" in (config.getoption("markexpr") or ""):
        return
    fuzz = [item for item in items if item.get_closest_marker("fuzz") is not None]
    if fuzz:
        config.hook.pytest_deselected(items=fuzz)
        items[:] = [item for item in items if item.get_closest_marker("fuzz") is None]


@pytest.fixture
def workdir(tmp_path, monkeypatch):
    """A fresh working folder, also set as $GWDEFICIT_WORKDIR."""
    wd = tmp_path / "work"
    wd.mkdir()
    monkeypatch.setenv("GWDEFICIT_WORKDIR", str(wd))
    return wd
