"""What the counter screen asks of the register: one method per act, each one call into
the library (the same calls the command line makes), run off the screen's thread."""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, TypeVar

from issuer.errors import ConnectionLost, IssuerError, RegisterError

T = TypeVar("T")

#: how often an act is tried again when the database connection is lost
RECONNECT_ATTEMPTS = 5


@dataclass(frozen=True)
class Answered:
    """An answer to a scan, with the stored record when the code is the register's."""

    answer: Any
    record: Any = None


@dataclass
class CounterDesk:
    """The register as the counter uses it. ``series`` is the series new codes come
    from; ``label_folder`` where reprinted labels are written (or ``print_command``)."""

    register: Any
    series: str | None = None
    settings: Any = None
    label_folder: Path = field(default_factory=lambda: _temporary_folder())
    on_reconnect: Callable[[int], None] | None = None

    # -- reading --------------------------------------------------------------------

    def check(self, text: str) -> Answered:
        """The desk's answer, and for a code the register holds its full record (issued
        when and by whom, prints, last seen)."""
        from issuer.register.desk import check_with_records

        def read() -> Answered:
            with self.register.reading() as session:
                ((answer, record),) = check_with_records(session, [text], self.register.clock())
                return Answered(answer, record)

        return self._again(read)

    def history(self, code: str) -> tuple[Any, list[Any]]:
        from issuer.register.lifecycle import code_history

        def read() -> tuple[Any, list[Any]]:
            with self.register.reading() as session:
                return code_history(session, code)

        return self._again(read)

    def find(self, text: str) -> list[Any]:
        from issuer.register.holders import find_holders

        def read() -> list[Any]:
            with self.register.reading() as session:
                return find_holders(session, text, series=self.series)

        return self._again(read)

    def series_keys(self) -> list[str]:
        from issuer.register.series import all_series

        with self.register.reading() as session:
            return [series.key for series in all_series(session)]

    # -- acts -----------------------------------------------------------------------

    def issue(self, holder: str | None, note: str | None) -> Any:
        """Issue one code of the current series. A request id is chosen once, so a retry
        after a lost connection returns the code the first try issued, never a second."""
        from issuer.register.issuing import issue_codes

        if self.series is None:
            raise IssuerError("choose a series first (F10), or start with --series KEY")
        import secrets

        request_id = f"counter-{secrets.token_hex(8)}"
        return self._again(lambda: issue_codes(
            self.register, self.series or "", 1, holder=holder, note=note, request_id=request_id,
        )).codes[0]  # fmt: skip

    def void(self, code: str, reason: str) -> Any:
        from issuer.register.lifecycle import void_code

        return self._once(lambda: void_code(self.register, code, reason=reason))

    def replace(self, code: str, reason: str) -> Any:
        from issuer.register.lifecycle import replace_code

        return self._once(lambda: replace_code(self.register, code, reason=reason))

    def restore(self, code: str, reason: str) -> Any:
        from issuer.register.lifecycle import restore_code

        return self._once(lambda: restore_code(self.register, code, reason=reason))

    def set_holder(self, code: str, holder: str) -> Any:
        from issuer.register.holders import clear_holder, set_holder

        if holder.strip():
            return self._once(lambda: set_holder(self.register, code, holder))
        return self._once(lambda: clear_holder(self.register, code))

    def reprint(self, code: str, reason: str) -> Any:
        """Draw the code's label again (logged as a reprint) into the label folder."""
        from issuer.labels.printjob import options_from_settings, print_selection
        from issuer.register.printing import select_for_printing

        options = options_from_settings(self.settings, "pdf")
        selection = select_for_printing(self.register, codes=[code])
        self.label_folder.mkdir(mode=0o700, parents=True, exist_ok=True)
        out = self.label_folder / f"reprint-{code}-{time.strftime('%Y%m%d-%H%M%S')}.pdf"
        return self._once(lambda: print_selection(self.register, selection, out, options,
                                                  reason=reason, reprint=True))  # fmt: skip

    # -- a lost connection ----------------------------------------------------------

    def _again(self, work: Callable[[], T]) -> T:
        """Reads and request-id acts: safe to run again after a lost connection."""
        for attempt in range(1, RECONNECT_ATTEMPTS + 1):
            try:
                return work()
            except Exception as exc:
                if not _lost(exc) or attempt == RECONNECT_ATTEMPTS:
                    raise
                if self.on_reconnect is not None:
                    self.on_reconnect(attempt)
                time.sleep(min(0.5 * attempt, 3.0))
        raise AssertionError("unreachable")  # pragma: no cover

    def _once(self, work: Callable[[], T]) -> T:
        """Acts without a request id run once; when the connection drops mid-act the
        outcome is unknown, and the clerk is told to look before acting again."""
        try:
            return work()
        except Exception as exc:
            if _lost(exc):
                raise RegisterError(
                    "the connection to the register was lost during the act: its outcome is "
                    "unknown. Scan the code again to see its state before acting again."
                ) from None
            raise


def open_desk(settings: Any, *, series: str | None = None, label_folder: Path | None = None) -> CounterDesk:
    """Open the register ``settings`` name (never making one: a mistyped path stays a
    mistake) and check that ``series``, when given, is one of its series. The counter
    calls this after its first frame, so the database library loads behind the screen."""
    from issuer.register.series import get_series
    from issuer.register.store import open_register

    timeout = int(settings.section("register").get("busy_timeout_ms", 15000))
    register = open_register(settings.database, actor=settings.actor, busy_timeout_ms=timeout, create=False)
    try:
        if series is not None:
            with register.reading() as session:
                get_series(session, series)  # an unknown series ends the screen with one line
    except BaseException:
        register.close()
        raise
    folder = label_folder or settings.section("counter").get("label_folder")
    desk = CounterDesk(register, series=series, settings=settings)
    if folder:
        desk.label_folder = Path(str(folder)).expanduser()
    return desk


def _temporary_folder() -> Path:
    import tempfile  # loaded when a desk is made (behind the screen), not for the first frame

    return Path(tempfile.gettempdir())


def _lost(exc: Exception) -> bool:
    """A dropped database connection: the library's word for it on writes, the driver's
    flag on reads (the faces never import the database library to ask by type)."""
    return isinstance(exc, ConnectionLost) or bool(getattr(exc, "connection_invalidated", False))
