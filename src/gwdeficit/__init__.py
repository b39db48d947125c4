"""gwdeficit: how much mass compact-binary mergers turn into gravitational waves.

Public API (imported lazily so that ``gwdeficit --help`` starts fast):

- :func:`load_catalogue` / :func:`read_catalogue`: user table -> canonical catalogue DataFrame
- :func:`remnant` (arrays) and :func:`compute_remnants` (catalogue DataFrame): remnant mass,
  spin, radiated energy and recoil from published numerical-relativity fits
- :func:`mass_loss_rates`: per-merger deficits x rate density x volume, with bootstrap errors
- :func:`cosmic_budget`: energy density and mass-density history over cosmic time

All results are research estimates; see the README for calibrated ranges and cautions.
"""

from __future__ import annotations

import importlib
from typing import Any

__version__ = "0.1.0"

_EXPORTS = {
    "load_catalogue": "gwdeficit.io",
    "read_catalogue": "gwdeficit.io",
    "remnant": "gwdeficit.remnant",
    "compute_remnants": "gwdeficit.remnant",
    "mass_loss_rates": "gwdeficit.budget",
    "cosmic_budget": "gwdeficit.cosmic",
    "GwdeficitError": "gwdeficit.schema",
}

__all__ = ["__version__", *_EXPORTS]


def __getattr__(name: str) -> Any:
    module = _EXPORTS.get(name)
    if module is None:
        raise AttributeError(f"module 'gwdeficit' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(__all__)
