"""The JSON API, version 1: ``/api/v1/...``.

Each handler checks the caller's right to the act, calls one library function and
shapes its answer; the transaction commits inside the library call, before the response
is sent. Blocking register calls run on the service's threads (:meth:`ServiceState.read`);
writers through :meth:`ServiceState.write` (on SQLite one writer thread, in arrival order).
"""

from __future__ import annotations

import json
import tempfile
from collections.abc import Iterator
from pathlib import Path
from typing import Annotated, Any, TypeVar, cast

from fastapi import APIRouter, Depends, Header, HTTPException, Query, Request
from fastapi.responses import Response, StreamingResponse
from pydantic import BaseModel, ConfigDict, Field

from issuer.service.auth import caller_from_header, require
from issuer.service.state import Caller, ServiceState

router = APIRouter(prefix="/api/v1")
_Shape = TypeVar("_Shape", dict[str, Any], list[dict[str, Any]])

TEXT = 200  # the longest holder, note or reason accepted here, as in the register


class Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", strict=True)


class IssueBody(Strict):
    count: int = Field(1, ge=1, le=10_000, description="How many codes, all in one batch.")
    holder: str | None = Field(None, max_length=TEXT, description="Who holds the item or card (personal data).")
    note: str | None = Field(None, max_length=2000, description="A note kept with each code.")


class ReasonBody(Strict):
    reason: str = Field(..., min_length=1, max_length=2000, description="Why, for the log.")


class CheckBody(Strict):
    codes: list[Annotated[str, Field(max_length=200)]] = Field(..., min_length=1, max_length=1000)


def state_of(request: Request) -> ServiceState:
    return request.app.state.issuer  # type: ignore[no-any-return]


StateDep = Annotated[ServiceState, Depends(state_of)]
CallerDep = Annotated[Caller, Depends(caller_from_header)]


def _jsonable(data: _Shape) -> _Shape:
    """``data`` as JSON sends it (times and other values as text), the same lists and dicts."""
    return cast("_Shape", json.loads(json.dumps(data, default=str)))


# -- series ---------------------------------------------------------------------------


@router.get("/series", summary="Every series with its shape and fill")
async def list_series(state: StateDep, caller: CallerDep) -> list[dict[str, Any]]:
    from issuer.register.series import all_series, series_state

    require(caller, "read")

    def work() -> list[dict[str, Any]]:
        with state.register.reading() as session:
            return _jsonable([series_state(session, s).as_dict() for s in all_series(session)])

    return await state.read(work)


@router.get("/series/{key}", summary="One series")
async def show_series(key: str, state: StateDep, caller: CallerDep) -> dict[str, Any]:
    from issuer.register.series import get_series, series_state

    require(caller, "read")

    def work() -> dict[str, Any]:
        with state.register.reading() as session:
            return _jsonable(series_state(session, get_series(session, key)).as_dict())

    return await state.read(work)


@router.post("/series/{key}/issue", status_code=201, summary="Issue the next code(s): whole batch or nothing")
async def issue(
    key: str,
    body: IssueBody,
    state: StateDep,
    caller: CallerDep,
    idempotency_key: Annotated[
        str | None,
        Header(max_length=200, description="A retry with the same key returns the same codes."),
    ] = None,
) -> dict[str, Any]:
    from issuer.register.issuing import issue_codes

    require(caller, "issue")
    register = state.acting(caller)
    # the key is the caller's own: two callers choosing the same key never meet
    request_id = f"{caller.name}:{idempotency_key}" if idempotency_key else None
    result = await state.write(lambda: issue_codes(
        register, key, body.count, holder=body.holder, note=body.note, request_id=request_id,
    ))  # fmt: skip
    return {
        "batch": result.batch,
        "series": result.series,
        "replayed": result.replayed,
        "codes": [info.as_dict() for info in result.codes],
    }


@router.get("/series/{key}/export", summary="Every code of a series, streamed")
async def export(
    key: str,
    state: StateDep,
    caller: CallerDep,
    format: Annotated[str, Query(pattern="^(csv|json|jsonl)$")] = "csv",
    status: Annotated[str, Query(pattern="^(all|issued|voided)$")] = "all",
) -> StreamingResponse:
    from issuer.register.transfer import count_codes, export_codes

    require(caller, "read")

    def work() -> Any:
        count_codes(state.register, key, status)  # an unknown series is a 404 before streaming
        spool = tempfile.TemporaryFile(mode="w+", encoding="utf-8", newline="")
        try:
            export_codes(state.register, key, spool, fmt=format, status=status)
        except BaseException:
            spool.close()
            raise
        spool.seek(0)
        return spool

    spool = await state.read(work)

    def chunks() -> Iterator[str]:
        with spool:
            while part := spool.read(64 * 1024):
                yield part

    media = {"csv": "text/csv", "json": "application/json", "jsonl": "application/jsonl"}[format]
    return StreamingResponse(chunks(), media_type=f"{media}; charset=utf-8", headers={
        "Content-Disposition": f'attachment; filename="{key}.{format}"'})  # fmt: skip


@router.post("/series/{key}/reconcile", summary="A scan file (request body) against the series")
async def reconcile(key: str, request: Request, state: StateDep, caller: CallerDep) -> dict[str, Any]:
    require(caller, "reconcile")
    raw = await request.body()
    kind = request.headers.get("content-type", "text/plain").split(";")[0].strip()
    suffix = {"text/csv": ".csv", "application/jsonl": ".jsonl", "application/x-ndjson": ".jsonl",
              "application/json": ".jsonl", "text/plain": ".txt"}.get(kind)  # fmt: skip
    if suffix is None:
        raise HTTPException(415, f"send the scan file as text/plain, text/csv or application/jsonl, not {kind}")
    return await state.read(lambda: _reconcile(state, key, raw, suffix))


def _reconcile(state: ServiceState, key: str, raw: bytes, suffix: str) -> dict[str, Any]:
    from issuer.stocktake.reconcile import read_scans
    from issuer.stocktake.reconcile import reconcile as run
    from issuer.stocktake.report import as_json

    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / f"scans{suffix}"
        path.write_bytes(raw)
        table = read_scans(path)
        return _jsonable(as_json(run(state.register, key, table)))


# -- codes ----------------------------------------------------------------------------


@router.post("/check", summary="Check typed or scanned codes: status and likely intended codes")
async def check_many(body: CheckBody, state: StateDep, caller: CallerDep) -> list[dict[str, Any]]:
    from issuer.register.desk import check_codes

    require(caller, "read")

    def work() -> list[dict[str, Any]]:
        with state.register.reading() as session:
            answers = check_codes(session, body.codes, state.register.clock())
            return _jsonable([answer.as_dict() for answer in answers])

    return await state.read(work)


@router.get("/check/{code}", summary="Check one code")
async def check_one(code: str, state: StateDep, caller: CallerDep) -> dict[str, Any]:
    from issuer.register.desk import check_codes

    require(caller, "read")
    if len(code) > 200:
        raise HTTPException(422, "a code is at most 200 characters")

    def work() -> dict[str, Any]:
        with state.register.reading() as session:
            return _jsonable(check_codes(session, [code], state.register.clock())[0].as_dict())

    return await state.read(work)


@router.get("/codes/{code}/history", summary="A code's record and every logged event about it")
async def history(code: str, state: StateDep, caller: CallerDep) -> dict[str, Any]:
    from issuer.register.lifecycle import code_history

    require(caller, "read")

    def work() -> dict[str, Any]:
        with state.register.reading() as session:
            record, events = code_history(session, code)
        return _jsonable({"code": record.as_dict(), "events": [event.as_dict() for event in events]})

    return await state.read(work)


@router.post("/codes/{code}/void", summary="Void a code for good (never issued again)")
async def void(code: str, body: ReasonBody, state: StateDep, caller: CallerDep) -> dict[str, Any]:
    from issuer.register.lifecycle import void_code

    require(caller, "void")
    register = state.acting(caller)
    return _jsonable((await state.write(lambda: void_code(register, code, reason=body.reason))).as_dict())


@router.post("/codes/{code}/replace", status_code=201, summary="Void a code and issue its replacement")
async def replace(code: str, body: ReasonBody, state: StateDep, caller: CallerDep) -> dict[str, Any]:
    from issuer.register.lifecycle import replace_code

    require(caller, "replace")
    register = state.acting(caller)
    made = await state.write(lambda: replace_code(register, code, reason=body.reason))
    return _jsonable(dict(made.__dict__))


@router.post("/codes/{code}/restore", summary="Restore a voided code")
async def restore(code: str, body: ReasonBody, state: StateDep, caller: CallerDep) -> dict[str, Any]:
    from issuer.register.lifecycle import restore_code

    require(caller, "restore")
    register = state.acting(caller)
    return _jsonable((await state.write(lambda: restore_code(register, code, reason=body.reason))).as_dict())


# -- labels ---------------------------------------------------------------------------

LABEL_TYPES = {"pdf": "application/pdf", "png": "image/png", "svg": "image/svg+xml"}


@router.get("/labels", summary="Labels as a PDF sheet, or one label as PNG or SVG (logged as printed)")
async def labels(
    state: StateDep,
    caller: CallerDep,
    code: Annotated[list[str] | None, Query(max_length=500)] = None,
    batch: Annotated[int | None, Query(ge=1, le=2**62)] = None,
    series: Annotated[str | None, Query(max_length=64)] = None,
    format: Annotated[str, Query(pattern="^(pdf|png|svg)$")] = "pdf",
    layout: Annotated[str | None, Query(max_length=64)] = None,
    reason: Annotated[str | None, Query(max_length=2000, description="Makes this a logged reprint.")] = None,
) -> Response:
    require(caller, "reprint" if reason else "labels")
    content = await state.write(lambda: draw_labels(
        state, caller, codes=code or (), batch=batch, series=series, kind=format,
        layout=layout, reason=reason,
    ))  # fmt: skip
    return Response(content, media_type=LABEL_TYPES[format],
                    headers={"Content-Disposition": f'attachment; filename="labels.{format}"'})  # fmt: skip


def draw_labels(
    state: ServiceState,
    caller: Caller,
    *,
    codes: Any = (),
    batch: int | None = None,
    series: str | None = None,
    kind: str = "pdf",
    layout: str | None = None,
    reason: str | None = None,
) -> bytes:
    """Draw and log a print job into a private temporary folder; return the file's bytes."""
    from issuer.labels.printjob import options_from_settings, print_selection
    from issuer.register.printing import select_for_printing

    options = options_from_settings(state.settings, kind, layout)
    register = state.acting(caller)
    selection = select_for_printing(register, codes=tuple(codes), batch=batch, series=series)
    with tempfile.TemporaryDirectory() as folder:
        out = Path(folder) / f"labels.{kind}"
        print_selection(register, selection, out, options,
                        reason=reason, reprint=reason is not None)  # fmt: skip
        return out.read_bytes()
