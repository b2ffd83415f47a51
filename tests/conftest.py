"""Shared test configuration: the hypothesis profiles of the property-based fuzz tests (test_fuzz.py).

- ``ci`` (the default under pytest): a few hundred examples over all the fuzz tests, derandomized so
  that every run tries the same inputs and CI is deterministic.
- ``deep``: at least 10,000 examples in total, random; select it with ``LOSCHMIDT_FUZZ=deep``, e.g.
  ``LOSCHMIDT_FUZZ=deep pytest -q tests/test_fuzz.py --hypothesis-show-statistics``.

No example database is kept (nothing is written into the source tree). Each fuzz test asks for a
multiple of the profile's ``max_examples`` (test_fuzz.fuzz), so the totals scale with the profile.
"""

from __future__ import annotations

import os

from hypothesis import HealthCheck, settings

_COMMON = dict(
    deadline=None,  # integrations have their own budgets; timing varies on a shared machine
    database=None,
    print_blob=True,
    suppress_health_check=[
        HealthCheck.too_slow,
        HealthCheck.filter_too_much,
        HealthCheck.data_too_large,
        HealthCheck.large_base_example,
    ],
)

settings.register_profile("ci", max_examples=10, derandomize=True, **_COMMON)
settings.register_profile("deep", max_examples=330, derandomize=False, **_COMMON)

_PROFILE = os.environ.get("LOSCHMIDT_FUZZ", "ci").strip().lower() or "ci"
if _PROFILE not in ("ci", "deep"):
    raise RuntimeError(f"LOSCHMIDT_FUZZ: expected 'ci' or 'deep', got {_PROFILE!r}")
settings.load_profile(_PROFILE)


import pytest  # noqa: E402


@pytest.fixture(autouse=True)
def _run_in_a_temporary_directory(tmp_path, monkeypatch):
    """Every test runs in its own temporary directory: relative output paths (a configuration file's
    store or picture, the command line's defaults) land there, never in the source tree."""
    monkeypatch.chdir(tmp_path)
