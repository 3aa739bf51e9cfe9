"""Retries and interruptions tell the truth: a changed retry under a request id is
refused naming the change; Ctrl-C before the commit says nothing was done, after it names
the batch and how to get its codes (issue, import, labels, reconcile --record)."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

import pytest
from sqlalchemy import func, select

from issuer.register.defining import SeriesSpec, add_series
from issuer.register.issuing import issue_codes
from issuer.register.models import IssuedCode
from issuer.register.store import Register

TOOLS = SeriesSpec(key="tools", scheme="damm", length=7, prefix="QTL", title="Tool tags")


def _held(db_path: Path) -> int:
    from issuer.register.store import open_register

    register = open_register(str(db_path), actor="reader", create=False)
    with register.reading() as session:
        value = int(session.scalar(select(func.count()).select_from(IssuedCode)) or 0)
    register.close()
    return value


ORIGINAL_WRITE = Register.write


def _ctrl_c(monkeypatch: pytest.MonkeyPatch, *, after_commit: bool) -> None:
    """Every writing transaction of the command meets Ctrl-C: just before its commit
    (rolled back), or just after it (committed)."""
    original = Register.write

    def write(self: Register, work: Callable[[Any], Any]) -> Any:
        if after_commit:
            original(self, work)
            raise KeyboardInterrupt
        with self.writing() as session:
            work(session)
            raise KeyboardInterrupt

    monkeypatch.setattr(Register, "write", write)


def test_a_changed_retry_is_refused_naming_the_change(cli: Any, register: Register, db_path: Path) -> None:
    add_series(register, TOOLS)
    first = cli("issue", "tools", "--holder", "Ada Finch", "--request-id", "desk2-0001", "--json")
    again = cli("issue", "tools", "--holder", "Ada Finch", "--request-id", "desk2-0001", "--json")
    assert json.loads(again.stdout)["replayed"] and json.loads(again.stdout)["codes"] == json.loads(first.stdout)["codes"]
    other = cli("issue", "tools", "--holder", "Bo Wren", "--request-id", "desk2-0001")
    assert other.exit_code == 2 and other.stderr.count("\n") == 1
    assert "holder was 'Ada Finch', now 'Bo Wren'" in other.stderr and "nothing was issued" in other.stderr
    noted = cli("issue", "tools", "-n", "2", "--holder", "Ada Finch", "--note", "loan", "--request-id", "desk2-0001")
    assert "count was 1, now 2" in noted.stderr and "note was not given, now 'loan'" in noted.stderr
    assert _held(db_path) == 1


@pytest.mark.parametrize("after_commit", [False, True], ids=["before-commit", "after-commit"])
def test_ctrl_c_while_issuing(cli: Any, register: Register, db_path: Path, tmp_path: Path,
                              monkeypatch: pytest.MonkeyPatch, after_commit: bool) -> None:
    add_series(register, TOOLS)
    issue_codes(register, "tools", 2)  # batch 1
    out = tmp_path / "codes.csv"
    _ctrl_c(monkeypatch, after_commit=after_commit)
    result = cli("issue", "tools", "-n", "100", "--out", str(out))
    assert result.exit_code == 130 and "Traceback" not in result.output
    assert result.stderr.strip().count("\n") == 0  # one line
    if after_commit:
        assert "batch 2 of series tools was committed: its codes are issued" in result.stderr
        assert "'issuer export tools --batch 2'" in result.stderr
        assert "'issuer labels --batch 2 --out FILE'" in result.stderr
        assert f"{out} was not written: 'issuer export tools --batch 2 --out {out}' writes them" in result.stderr
        assert _held(db_path) == 102
        monkeypatch.setattr(Register, "write", ORIGINAL_WRITE)
        exported = cli("export", "tools", "--batch", "2", "--format", "json")
        assert len(json.loads(exported.stdout)) == 100
    else:
        assert "interrupted: nothing was issued" in result.stderr
        assert _held(db_path) == 2 and not out.exists()


def test_export_batch_names_only_that_batch(cli: Any, register: Register) -> None:
    add_series(register, TOOLS)
    first = issue_codes(register, "tools", 3)
    second = issue_codes(register, "tools", 2)
    rows = json.loads(cli("export", "tools", "--batch", str(second.batch), "--format", "json").stdout)
    assert [row["code"] for row in rows] == [info.code for info in second.codes]
    assert first.batch != second.batch
    wrong = cli("export", "tools", "--batch", "99")
    assert wrong.exit_code == 2 and "batch 99 is not a batch of series tools" in wrong.stderr


@pytest.mark.parametrize("after_commit", [False, True], ids=["before-commit", "after-commit"])
def test_ctrl_c_while_importing(cli: Any, register: Register, db_path: Path, tmp_path: Path,
                                monkeypatch: pytest.MonkeyPatch, after_commit: bool) -> None:
    from issuer.register.series import code_format, get_series

    add_series(register, TOOLS)
    with register.reading() as session:
        shape = code_format(get_series(session, "tools"))
    legacy = tmp_path / "legacy.txt"
    legacy.write_text("".join(shape.code_for_base(base) + "\n" for base in range(500, 510)))
    _ctrl_c(monkeypatch, after_commit=after_commit)
    result = cli("import", "tools", str(legacy))
    assert result.exit_code == 130 and "Traceback" not in result.output
    if after_commit:
        assert "of series tools was committed: its codes are imported" in result.stderr
        assert "--batch" in result.stderr and _held(db_path) == 10
    else:
        assert "nothing was imported" in result.stderr and _held(db_path) == 0


@pytest.mark.parametrize("after_commit", [False, True], ids=["before-commit", "after-commit"])
def test_ctrl_c_while_printing_labels(cli: Any, register: Register, tmp_path: Path,
                                      monkeypatch: pytest.MonkeyPatch, after_commit: bool) -> None:
    add_series(register, TOOLS)
    batch = issue_codes(register, "tools", 3).batch
    out = tmp_path / "labels.pdf"
    _ctrl_c(monkeypatch, after_commit=after_commit)
    result = cli("labels", "--batch", str(batch), "--out", str(out))
    assert result.exit_code == 130 and "Traceback" not in result.output
    if after_commit:
        assert "3 label(s) were recorded as printed" in result.stderr
        assert "issuer reprint" in result.stderr  # the file was never moved into place
    else:
        assert "nothing was recorded as printed" in result.stderr and not out.exists()


@pytest.mark.parametrize("after_commit", [False, True], ids=["before-commit", "after-commit"])
def test_ctrl_c_while_recording_a_stocktake(cli: Any, register: Register, tmp_path: Path,
                                            monkeypatch: pytest.MonkeyPatch, after_commit: bool) -> None:
    add_series(register, TOOLS)
    codes = [info.code for info in issue_codes(register, "tools", 3).codes]
    scan = tmp_path / "scan.txt"
    scan.write_text("\n".join(codes) + "\n")
    _ctrl_c(monkeypatch, after_commit=after_commit)
    result = cli("reconcile", "tools", str(scan), "--record")
    assert result.exit_code == 130 and "Traceback" not in result.output
    if after_commit:
        assert "the stocktake was recorded (3 sightings" in result.stderr
    else:
        assert "nothing was recorded" in result.stderr
    monkeypatch.setattr(Register, "write", ORIGINAL_WRITE)
    seen = json.loads(cli("log", "--json").stdout)
    assert sum(entry["action"] == "seen" for entry in seen) == (3 if after_commit else 0)


def test_sigint_to_a_real_process_tells_what_happened(db_path: Path, register: Register, tmp_path: Path) -> None:
    """A real `issuer issue` of a big batch gets SIGINT once it is writing; whatever the
    moment, its last line must agree with the register."""
    add_series(register, TOOLS)
    wal = Path(f"{db_path}-wal")
    env = dict(os.environ, ISSUER_DB=str(db_path), ISSUER_ACTOR="desk-1", COLUMNS="80")
    process = subprocess.Popen(
        [sys.executable, "-m", "issuer", "issue", "tools", "-n", "150000", "--out", str(tmp_path / "c.csv")],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env, cwd=tmp_path,
    )  # fmt: skip
    size = wal.stat().st_size if wal.exists() else 0
    deadline = time.monotonic() + 90
    while process.poll() is None and time.monotonic() < deadline:
        if wal.exists() and wal.stat().st_size > size + 500_000:  # rows are going in
            break
        time.sleep(0.02)
    process.send_signal(signal.SIGINT)
    out, err = process.communicate(timeout=120)
    held = _held(db_path)
    if process.returncode == 0:  # it finished before the signal came: a plain success
        assert held == 150_000 and "Issued 150,000 codes" in out
        return
    assert process.returncode == 130 and "Traceback" not in err, err
    if "nothing was issued" in err:
        assert held == 0
    else:
        assert "batch 1 of series tools was committed" in err and held == 150_000


def test_ctrl_c_while_starting_is_one_line(monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]) -> None:
    import types

    from issuer.cli import main as entry

    class Loading(types.ModuleType):
        def __getattr__(self, name: str) -> Any:
            raise KeyboardInterrupt  # Ctrl-C while the command modules are still loading

    monkeypatch.setitem(sys.modules, "issuer.cli.app", Loading("issuer.cli.app"))
    monkeypatch.setattr(sys, "argv", ["issuer", "check", "QTL-0000-0013"])
    with pytest.raises(SystemExit) as stopped:
        entry.main()
    assert stopped.value.code == 130
    assert capsys.readouterr().err == "\nissuer: interrupted while starting; nothing was done\n"
