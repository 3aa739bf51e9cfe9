"""A register with a tool series issued in order, for the counter's pilot tests
(demo data: the fictional Quillmere Tool Library)."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pytest


@pytest.fixture
def desk(register: Any, tmp_path: Path) -> Any:
    from datetime import UTC, datetime

    from issuer.config import load_settings
    from issuer.counter.desk import CounterDesk
    from issuer.register.defining import SeriesSpec, add_series
    from issuer.register.issuing import issue_codes

    # a fixed clock: what the screen shows (issued when) stays the same run after run
    register.clock = lambda: datetime(2026, 3, 14, 9, 30, tzinfo=UTC)
    add_series(register, SeriesSpec(key="tools", scheme="luhn", length=6, prefix="QT", title="Tool tags"))
    issue_codes(register, "tools", 30, holder="workshop shelf B")
    return CounterDesk(register, series="tools", settings=load_settings(), label_folder=tmp_path / "labels")


def make_app(desk: Any) -> Any:
    from issuer.counter.app import CounterApp

    return CounterApp(desk, where="Quillmere test register")
