"""Hostile tables through the ingest stage: load correctly or fail with a typed error.

The default suite runs a modest, derandomised number of cases; the dedicated run
(``pytest -m fuzz tests/fuzz``) runs ``$GWDEFICIT_FUZZ_EXAMPLES`` cases (default 10 000) with
fresh random draws. Each case goes through the Python API with ``on_bad`` "error" and "skip",
and through ``gwdeficit ingest`` (exit code 0 or 2, never 1). What "correctly" means is fixed
by the oracle in :mod:`tests.fuzz.strategies`.
"""

from __future__ import annotations

import os

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from .oracle import check_api, check_cli
from .strategies import hostile_cases

DEFAULT_EXAMPLES = 200
FUZZ_EXAMPLES = int(os.environ.get("GWDEFICIT_FUZZ_EXAMPLES", "10000"))
_HEALTH = [HealthCheck.too_slow, HealthCheck.data_too_large, HealthCheck.filter_too_much]


def _run(case, on_bad: str, via_cli: bool) -> None:
    check_api(case, "error")
    check_api(case, "skip")
    if via_cli:
        check_cli(case, on_bad)


@settings(
    max_examples=DEFAULT_EXAMPLES,
    deadline=None,
    derandomize=True,
    suppress_health_check=_HEALTH,
    database=None,
)
@given(case=hostile_cases(), on_bad=st.sampled_from(("error", "skip")), via_cli=st.booleans())
def test_hostile_tables(case, on_bad, via_cli):
    _run(case, on_bad, via_cli)


@pytest.mark.fuzz
@settings(max_examples=FUZZ_EXAMPLES, deadline=None, suppress_health_check=_HEALTH)
@given(case=hostile_cases(), on_bad=st.sampled_from(("error", "skip")), via_cli=st.booleans())
def test_hostile_tables_dedicated_run(case, on_bad, via_cli):
    _run(case, on_bad, via_cli)
