"""The one module that writes files for people: refusals, whole-or-nothing, leftovers,
owner-only folders and spreadsheet-safe cells."""

from __future__ import annotations

import os
import sqlite3
import stat
import subprocess
import sys
from pathlib import Path

import pytest

from issuer import outputs
from issuer.outputs import OutputRefused, check_target, output_text, restore_cell, safe_cell


def _sqlite(path: Path) -> Path:
    connection = sqlite3.connect(path)
    connection.execute("CREATE TABLE t (x)")
    connection.commit()
    connection.close()
    return path


def test_an_existing_file_is_refused_without_force(tmp_path: Path) -> None:
    target = tmp_path / "codes.csv"
    target.write_text("earlier")
    with pytest.raises(OutputRefused, match="exists already; give --force"):
        check_target(target)
    assert check_target(target, force=True) == target
    with output_text(target, force=True) as stream:
        stream.write("new")
    assert target.read_text() == "new"


@pytest.mark.parametrize("side", ["", "-wal", "-shm", "-journal"])
def test_a_register_and_its_journals_are_refused_even_with_force(tmp_path: Path, side: str) -> None:
    register = _sqlite(tmp_path / "r.sqlite")
    outputs.protect(register)
    target = Path(f"{register}{side}")
    target.touch()
    with pytest.raises(OutputRefused, match="never writes over it, even with --force"):
        check_target(target, force=True)


def test_any_sqlite_database_and_a_link_to_one_are_refused(tmp_path: Path) -> None:
    other = _sqlite(tmp_path / "someone-elses.db")
    (tmp_path / "link.csv").symlink_to(other)
    for target in (other, tmp_path / "link.csv"):
        with pytest.raises(OutputRefused, match="SQLite database"):
            check_target(target, force=True)


def test_folders_and_devices_are_refused_even_with_force(tmp_path: Path) -> None:
    with pytest.raises(OutputRefused, match="is a folder"):
        check_target(tmp_path, force=True)
    with pytest.raises(OutputRefused, match="not a regular file"):
        check_target("/dev/null", force=True)


def test_a_failed_write_leaves_neither_target_nor_temporary(tmp_path: Path) -> None:
    target = tmp_path / "report.csv"
    target.write_text("earlier")
    with pytest.raises(RuntimeError), output_text(target, force=True) as stream:
        stream.write("half")
        raise RuntimeError("stop")
    assert target.read_text() == "earlier"
    assert [p.name for p in tmp_path.iterdir()] == ["report.csv"]


def test_a_file_that_appears_meanwhile_is_not_replaced(tmp_path: Path) -> None:
    target = tmp_path / "codes.csv"
    with pytest.raises(OutputRefused, match="appeared meanwhile"), output_text(target) as stream:
        stream.write("ours")
        target.write_text("theirs")
    assert target.read_text() == "theirs"
    assert [p.name for p in tmp_path.iterdir()] == ["codes.csv"]


def test_missing_folders_are_made_owner_only_whatever_the_umask(tmp_path: Path) -> None:
    old = os.umask(0)
    try:
        with output_text(tmp_path / "a" / "b" / "out.csv") as stream:
            stream.write("x")
    finally:
        os.umask(old)
    for folder in (tmp_path / "a", tmp_path / "a" / "b"):
        assert stat.S_IMODE(folder.stat().st_mode) == 0o700
    assert stat.S_IMODE((tmp_path / "a" / "b" / "out.csv").stat().st_mode) == 0o600


def test_leftovers_of_a_killed_writer_are_found_and_removed(tmp_path: Path) -> None:
    # a real process takes a temporary and dies without cleaning up (kill -9 behaves alike)
    script = (
        "import os, sys; from pathlib import Path; from issuer.outputs import temporary_beside; "
        "temp, note = temporary_beside(Path(sys.argv[1])); temp.write_text('codes of a rolled-back batch'); "
        "os._exit(9)"
    )
    subprocess.run([sys.executable, "-c", script, str(tmp_path / "codes.csv")], check=False, env=os.environ)
    found = outputs.leftovers()
    assert [item.path.parent for item in found] == [tmp_path]
    assert found[0].path.name.startswith(".issuer-")
    # and found by the folder alone too (a temporary whose note was lost)
    for note in outputs.pending_folder().iterdir():
        note.unlink()
    assert [item.path for item in outputs.leftovers([tmp_path])] == [found[0].path]
    assert outputs.remove_leftovers(outputs.leftovers([tmp_path])) == 1
    assert list(tmp_path.iterdir()) == []


def test_a_live_writers_temporary_is_not_a_leftover(tmp_path: Path) -> None:
    with output_text(tmp_path / "out.csv") as stream:
        stream.write("x")
        assert outputs.leftovers([tmp_path]) == []


@pytest.mark.parametrize(
    "cell",
    ['=HYPERLINK("http://x","y")', "+1", "-1", "@SUM(1)", "\tlead tab", "\rlead cr", "'quoted", "''twice"],
)
def test_formula_cells_are_neutralised_and_restored(cell: str) -> None:
    safe = safe_cell(cell)
    assert safe.startswith("'") and safe[1:] == cell
    assert restore_cell(safe) == cell


def test_plain_cells_and_numbers_are_left_alone() -> None:
    for cell in ("Workshop bench", "QTL-0000001-5", "", "2026-03-14T09:30:00Z", "'tis"):
        assert safe_cell(cell) in (cell, "'" + cell)
        assert restore_cell(safe_cell(cell)) == cell
    assert safe_cell(-5) == -5
    assert restore_cell("'tis") == "'tis"
