"""Many desks, one register: desks as real processes issuing at the same moment, on
SQLite and on PostgreSQL. Zero duplicates, zero lost, in-order series gapless, scattered
series holding exactly the first counters' numbers, every log entry matching its codes.

The in-order run is full size by default (16 desks x 500 codes, one durable
transaction per code); the scattered and mixed runs take that size with
ISSUER_LONG_TESTS=1 and fewer codes per desk otherwise, still as processes.
"""

from __future__ import annotations

from collections import Counter

import pytest

from tests.register.consistency import assert_consistent
from tests.register.desks import LONG, run_desks
from tests.register.pg import pg_database, pg_url, register_url  # noqa: F401

DESKS, FULL = 16, 500
EACH = {"sequential": FULL, "scattered": FULL if LONG else 6}
MIXED_EACH = 500 if LONG else 8


def define(url: str, key: str, mode: str, **extra: object) -> None:
    from issuer.register.defining import SeriesSpec, add_series
    from issuer.register.store import open_register

    register = open_register(url, actor="setup")
    try:
        if mode == "sequential":
            spec = SeriesSpec(key=key, scheme="luhn", length=6, prefix="T", mode=mode, **extra)  # type: ignore[arg-type]
        else:
            spec = SeriesSpec(key=key, scheme="luhn", length=7, prefix="M", mode=mode, **extra)  # type: ignore[arg-type]
        add_series(register, spec)
    finally:
        register.close()


def jobs(url: str, mode: str, key: str, count: int) -> list[dict[str, object]]:
    return [
        {"mode": mode, "db": url, "series": key, "count": count, "seed": desk, "actor": f"desk-{desk}"}
        for desk in range(DESKS)
    ]


@pytest.mark.parametrize("mode", ["sequential", "scattered"])
def test_desks_issuing_one_at_a_time(register_url: str, mode: str) -> None:  # noqa: F811
    key = "tools" if mode == "sequential" else "members"
    define(register_url, key, mode, start=100)
    each = EACH[mode]
    reports = run_desks(jobs(register_url, "issue", key, each))

    issued = [r["code"] for desk in reports for r in desk]
    assert len(issued) == DESKS * each
    assert len(set(issued)) == len(issued), "a code was handed to two desks"

    facts = assert_consistent(register_url)  # gapless / permutation prefix, log agrees
    assert set(facts.codes) == set(issued), "the register and the desks disagree"
    assert facts.series_next[key] == DESKS * each
    assert facts.actions["issue"] == DESKS * each
    assert all(kind == "issue" and count == 1 for kind, count in facts.batches.values())
    if mode == "sequential":
        # each desk saw its numbers climb: a later issue never gets an older number
        for desk in reports:
            bases = [facts.codes[r["code"]][2] for r in desk]
            assert bases == sorted(bases)


def test_desks_issuing_voiding_and_replacing(register_url: str) -> None:  # noqa: F811
    define(register_url, "tools", "sequential")
    reports = run_desks(jobs(register_url, "mixed", "tools", MIXED_EACH))
    acts = Counter(r["op"] for desk in reports for r in desk)
    assert sum(acts.values()) == DESKS * MIXED_EACH

    voided = {r["code"] for desk in reports for r in desk if r["op"] == "void"}
    voided |= {r["old"] for desk in reports for r in desk if r["op"] == "replace"}
    new_codes = [r["code"] for desk in reports for r in desk if r["op"] in ("issue", "replace")]
    assert len(set(new_codes)) == len(new_codes), "a code was handed out twice"

    facts = assert_consistent(register_url)
    assert set(facts.codes) == set(new_codes)
    assert {code for code, (status, _b, _base) in facts.codes.items() if status == "voided"} == voided
    assert facts.series_next["tools"] == acts["issue"] + acts["replace"]
    assert facts.actions["issue"] == acts["issue"]
    assert facts.actions["void"] == acts["void"] + acts["replace"]
    assert facts.actions["replace"] == acts["replace"]
