"""The compact code sets a stocktake works with answer exactly as Python sets of the same
codes would: packed as integers when the series' symbols allow it, as text otherwise."""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from issuer.register.codeset import CodeSet
from issuer.stocktake.results import Tally

DIGITS = "0123456789"
CROCKFORD = "0123456789ABCDEFGHJKMNPQRSTVWXYZ"


def middles(symbols: str, width: int) -> st.SearchStrategy[str]:
    return st.text(alphabet=symbols, min_size=width, max_size=width)


@settings(max_examples=60, deadline=None)
@given(
    st.sampled_from([(DIGITS, 10), (CROCKFORD, 7), (CROCKFORD, 14)]).flatmap(
        lambda form: st.tuples(
            st.just(form), st.lists(middles(*form), max_size=40), st.lists(middles(*form), max_size=40)
        )
    )
)
def test_membership_and_order_match_python_sets(case: tuple[tuple[str, int], list[str], list[str]]) -> None:
    (symbols, width), held, asked = case
    held_codes = [f"QTL{m}X" for m in held]
    asked_codes = [f"QTL{m}X" for m in asked] + ["QTL", "QXL" + "0" * width + "X", "qtl" + "0" * width + "x"]
    form = {"prefix": "QTL", "suffix": "X", "width": width + 4, "symbols": symbols}
    codes = CodeSet(np.array(held_codes, dtype=f"S{width + 4}") if held_codes else np.array([]), **form)
    assert codes.packed == (width * (len(symbols) - 1).bit_length() <= 64)
    assert codes.codes() == sorted(set(held_codes))
    assert len(codes) == len(set(held_codes))
    assert [code in codes for code in asked_codes] == [code in set(held_codes) for code in asked_codes]
    fixed = np.array([code.encode() for code in asked_codes[:-3]], dtype=f"S{width + 4}")
    if fixed.size:
        assert codes.contains(fixed).tolist() == [code in set(held_codes) for code in asked_codes[:-3]]
        tally = Tally(fixed, codes)
        for code in asked_codes[:-3]:
            assert tally[code] == asked_codes.count(code)
        assert dict(tally.repeated()) == {c: asked_codes.count(c) for c in set(asked_codes[:-3]) if asked_codes.count(c) > 1}
    subset = codes.subset(asked_codes)
    assert subset.codes() == sorted(set(held_codes) & set(asked_codes))
