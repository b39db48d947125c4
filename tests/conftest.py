"""Shared test fixtures."""

from __future__ import annotations

import os

import pytest

os.environ.setdefault("MPLBACKEND", "Agg")


@pytest.fixture
def workdir(tmp_path, monkeypatch):
    """A fresh working folder, also set as $GWDEFICIT_WORKDIR."""
    wd = tmp_path / "work"
    wd.mkdir()
    monkeypatch.setenv("GWDEFICIT_WORKDIR", str(wd))
    return wd
