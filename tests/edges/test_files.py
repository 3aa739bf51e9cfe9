"""Defect 1: outputs never replace a file by mistake, never the register, never a non-file;
an `issue --out` that cannot be written leaves no batch behind."""

from __future__ import annotations

import stat
from pathlib import Path

import pytest

from tests.edges.helpers import fingerprint, ok, refused, run, tool, tools_register
from tests.register.pg import pg_database, pg_url, register_url  # noqa: F401


@pytest.fixture
def sqlite_url(tmp_path: Path) -> str:
    url = str(tmp_path / "r.sqlite")
    tools_register(url)
    return url


@pytest.mark.parametrize("side", ["", "-wal", "-shm", "-journal"])
def test_export_never_replaces_the_register_or_its_journals(sqlite_url: str, side: str) -> None:
    before = fingerprint(sqlite_url)
    target = Path(sqlite_url + side)
    if not target.exists():
        target.write_bytes(b"")  # closed registers leave no journal; a desk's open one would
    for force in ([], ["--force"]):
        refused(run(sqlite_url, "export", "tools", "--out", str(target), *force), "never writes over it")
        # SQLite itself may use and remove an empty journal; the export never wrote it
        assert not target.exists() or not target.read_bytes().startswith(b"code,")
    assert fingerprint(sqlite_url) == before


def test_issue_out_the_register_refuses_before_the_batch_commits(sqlite_url: str) -> None:
    before = fingerprint(sqlite_url)
    refused(run(sqlite_url, "issue", "tools", "-n", "3", "--out", sqlite_url, "--force"), "is the register")
    assert fingerprint(sqlite_url) == before


def test_every_output_refuses_an_existing_file_unless_forced(sqlite_url: str, tmp_path: Path) -> None:
    old = tmp_path / "old.csv"
    scan = tmp_path / "scan.txt"
    scan.write_text(f"{tool(1)}\n{tool(2)}\n")
    bad = tmp_path / "import.csv"
    bad.write_text(f"code\n{tool(700)}\n{tool(700)}\n")
    commands = {
        "export": ["export", "tools", "--out", str(old)],
        "reconcile": ["reconcile", "tools", str(scan), "--out", str(old)],
        "issue": ["issue", "tools", "--out", str(old)],
        "import rejects": ["import", "tools", str(bad), "--skip-bad", "--rejects", str(old)],
        "labels": ["labels", tool(1), "--out", str(tmp_path / "old.pdf")],
    }
    for name, args in commands.items():
        target = Path(args[args.index("--out") + 1] if "--out" in args else args[args.index("--rejects") + 1])
        target.write_bytes(b"earlier work")
        before = fingerprint(sqlite_url)
        refused(run(sqlite_url, *args), "exists already", "--force")
        assert target.read_bytes() == b"earlier work", name
        assert fingerprint(sqlite_url) == before, f"{name} changed the register although refused"
        result = run(sqlite_url, *args, "--force")
        assert result.exit_code in (0, 1), (name, result.output)  # reconcile says 1: codes missing
        assert target.read_bytes() != b"earlier work", name
        assert stat.S_IMODE(target.stat().st_mode) == 0o600, name


@pytest.mark.parametrize("target", ["/dev/null", "folder"])
def test_non_files_are_refused_even_with_force(sqlite_url: str, tmp_path: Path, target: str) -> None:
    path = tmp_path / "reports" if target == "folder" else tmp_path / "device.csv"
    if target == "folder":
        path.mkdir()
    else:
        path.symlink_to("/dev/null")  # a link to a device node: what the name points at counts
    before = fingerprint(sqlite_url)
    for args in (["export", "tools"], ["issue", "tools"]):
        refused(run(sqlite_url, *args, "--out", str(path), "--force"), "directory" if target == "folder" else "not a regular file")
    assert fingerprint(sqlite_url) == before


def test_issue_out_an_existing_file_leaves_no_batch_on_either_backend(register_url: str, tmp_path: Path) -> None:  # noqa: F811
    tools_register(register_url)
    existing = tmp_path / "codes.csv"
    existing.write_text("earlier")
    before = fingerprint(register_url)
    refused(run(register_url, "issue", "tools", "-n", "4", "--out", str(existing)), "exists already")
    assert fingerprint(register_url) == before and existing.read_text() == "earlier"
    ok(run(register_url, "issue", "tools", "-n", "4", "--out", str(existing), "--force"))
    assert existing.read_text().splitlines()[0] == "code,display,base,series,batch,holder"  # the holder column too


def test_a_backup_name_too_long_for_the_file_system_is_one_line(sqlite_url: str, tmp_path: Path) -> None:
    refused(run(sqlite_url, "backup", str(tmp_path / ("b" * 300 + ".sqlite"))), "at most 255")


def test_doctor_reports_and_removes_what_a_killed_writer_left(sqlite_url: str) -> None:
    import os
    import subprocess
    import sys

    folder = Path(sqlite_url).parent
    script = (
        "import os, sys; from pathlib import Path; from issuer.outputs import temporary_beside; "
        "temp, _ = temporary_beside(Path(sys.argv[1])); temp.write_text('QTL codes of a rolled-back batch'); "
        "os.kill(os.getpid(), 9)"
    )
    subprocess.run([sys.executable, "-c", script, str(folder / "codes.csv")], check=False, env=os.environ)
    leftover = [p for p in folder.iterdir() if p.name.startswith(".issuer-")]
    assert len(leftover) == 1
    report = run(sqlite_url, "doctor", "--json")
    import json

    found = {f["check"]: f for f in json.loads(report.stdout)["findings"]}
    assert found["leftovers"]["status"] == "warn" and str(leftover[0]) in found["leftovers"]["details"][0]
    fixed = json.loads(run(sqlite_url, "doctor", "--fix", "--json").stdout)
    assert {f["check"]: f for f in fixed["findings"]}["leftovers"]["summary"].startswith("removed 1")
    assert not leftover[0].exists()
