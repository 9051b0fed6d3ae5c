"""Shared fixtures."""

from __future__ import annotations

import os
import sys
from pathlib import Path

import pytest
from hypothesis import settings

# In CI every property test draws the same examples run after run (no flaky red runs); locally the
# examples vary, and Hypothesis keeps the failures it finds in .hypothesis/.
settings.register_profile("ci", derandomize=True, print_blob=True)
if os.environ.get("CI"):
    settings.load_profile("ci")

sys.path.insert(0, str(Path(__file__).resolve().parent))

REPO = Path(__file__).resolve().parents[1]
DEMO = REPO / "data" / "demo"


@pytest.fixture(autouse=True)
def _ample_free_memory(monkeypatch):
    """Every test sees a machine with 64 GiB free, so that no run fits itself to the test machine's free memory
    (models.estimate.memory_plan); a test of that fit sets its own."""
    from models import estimate

    monkeypatch.setattr(estimate, "available_bytes", lambda: 64 * 2**30)


@pytest.fixture(scope="session")
def demo_case():
    """The demo case, loaded once per session (strict: it must be valid)."""
    from models.case import load_case

    case, _ = load_case(DEMO, mode="strict")
    return case


@pytest.fixture(scope="session")
def demo_run_physics(demo_case):
    """The demo case and its physics (machines and bill savings), computed once per session."""
    from models import scenario

    return demo_case, scenario.physics(demo_case, float(demo_case.finance.capacitor_cost_per_kvar))
