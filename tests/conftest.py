"""Shared fixtures."""

from __future__ import annotations

import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).resolve().parent))

REPO = Path(__file__).resolve().parents[1]
DEMO = REPO / "data" / "demo"


@pytest.fixture(scope="session")
def demo_case():
    """The demo case, loaded once per session (strict: it must be valid)."""
    from models.case import load_case

    case, _ = load_case(DEMO, mode="strict")
    return case
