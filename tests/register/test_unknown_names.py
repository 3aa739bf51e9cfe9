"""Unknown series through the Python API: the message offers the nearest keys."""

from __future__ import annotations

import pytest

from issuer.errors import NotFound, did_you_mean, nearest
from issuer.register.defining import SeriesSpec, add_series
from issuer.register.issuing import issue_codes
from issuer.register.lifecycle import log_entries
from issuer.register.series import get_series
from issuer.register.store import Register


def test_nearest_names() -> None:
    names = ["cards", "passes", "tools"]
    assert nearest("tool", names) == ["tools"]
    assert nearest("TOOLS", names) == ["tools"]
    assert nearest("pas", names) == ["passes"]  # a typed beginning
    assert nearest("zz", names) == []
    assert did_you_mean("tols", names) == "; did you mean 'tools'?"
    assert did_you_mean("zz", names, "series") == "; the series are: cards, passes, tools"
    assert did_you_mean("zz", [f"s{k}" for k in range(20)]) == ""


def test_unknown_series_offers_the_nearest(register: Register) -> None:
    with pytest.raises(NotFound, match="has none yet"), register.reading() as session:
        get_series(session, "tools")
    add_series(register, SeriesSpec(key="tools", scheme="damm", length=7, prefix="QTL"))
    add_series(register, SeriesSpec(key="cards", scheme="damm", length=8, prefix="QM"))
    with pytest.raises(NotFound, match=r"no series 'tool' in this register; did you mean 'tools'\?"):
        issue_codes(register, "tool")
    with pytest.raises(NotFound, match="did you mean 'cards'"), register.reading() as session:
        log_entries(session, series="crads")
