"""Owner files of long names (watcher/xlsx/names.py). One family of spreadsheet programs names the owner
file of an open workbook ``~$`` + name, but for a long name (a stem of 8 or more characters; recalled from
memory) it replaces the first two characters instead: ``~$ssengers.xlsx`` for ``passengers.xlsx``. That
form must not make another workbook busy: ``~$report.xlsx`` is report.xlsx's own owner file."""
from __future__ import annotations

from pathlib import Path

from watcher.xlsx.names import LONG_STEM, owner_file, owner_file_candidates


def _touch(folder: Path, *names: str) -> None:
    for name in names:
        (folder / name).write_bytes(b"")


def test_an_open_short_name_does_not_make_a_longer_one_busy(tmp_path):
    _touch(tmp_path, "report.xlsx", "xxreport.xlsx", "~$report.xlsx")  # report.xlsx is open
    assert owner_file(tmp_path / "report.xlsx") == tmp_path / "~$report.xlsx"
    assert owner_file(tmp_path / "xxreport.xlsx") is None


def test_the_long_name_form_still_counts(tmp_path):
    _touch(tmp_path, "passengers.xlsx", "~$ssengers.xlsx")  # stem of 10: the truncated form
    assert owner_file(tmp_path / "passengers.xlsx") == tmp_path / "~$ssengers.xlsx"
    _touch(tmp_path, "xxreport.xlsx", "~$report.xlsx")  # stem of 8, and no report.xlsx beside it
    assert owner_file(tmp_path / "xxreport.xlsx") == tmp_path / "~$report.xlsx"


def test_a_short_name_has_no_truncated_candidate(tmp_path):
    assert len("report") < LONG_STEM
    assert [p.name for p in owner_file_candidates(Path("/s/report.xlsx"))] == \
        ["~$report.xlsx", ".~lock.report.xlsx#"]
    _touch(tmp_path, "report.xlsx", "~$port.xlsx")
    assert owner_file(tmp_path / "report.xlsx") is None


def test_a_long_twin_cannot_own_the_truncated_form(tmp_path):
    # ~$ + "ssengers.xlsx" cannot be the plain owner file of ssengers.xlsx: its stem is 8 long, so its
    # own owner file would be ~$engers.xlsx; the truncated form is passengers.xlsx's
    _touch(tmp_path, "passengers.xlsx", "ssengers.xlsx", "~$ssengers.xlsx")
    assert owner_file(tmp_path / "passengers.xlsx") == tmp_path / "~$ssengers.xlsx"
