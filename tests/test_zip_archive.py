"""The ZIP writer for pre-compressed members (reports/zip_archive.py), read back by CPython's zipfile (an
independent reader: it checks every member's CRC-32), in the classic form and in the ZIP64 form."""

from __future__ import annotations

import io
import zipfile

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sicheck.reports import zip_archive
from sicheck.reports.zip_archive import ZipWriter, deflate

NAMES = st.text(st.characters(blacklist_categories=("Cs", "Cc")), min_size=1, max_size=12)


def _write(members, tmp_path=None):
    buf = io.BytesIO()
    zw = ZipWriter(buf)
    for k, (name, data) in enumerate(members):
        if tmp_path is not None and k % 2:              # every other member from a file, as a child writes it
            path = tmp_path / f"m{k}"
            with open(path, "wb") as f:
                packed = deflate([data[:7], data[7:]], 1, f)
            zw.add(name, packed._replace(data=str(path)), (2026, 12, 2, 17, 30, 8))
        else:
            zw.add(name, deflate([data], 3), (2026, 12, 2, 17, 30, 8))
    zw.close()
    return buf.getvalue()


def _read(blob):
    with zipfile.ZipFile(io.BytesIO(blob)) as z:
        assert z.testzip() is None                       # every CRC-32 matches
        return [(i.filename, z.read(i), i.date_time) for i in z.infolist()]


@settings(max_examples=40, deadline=None)
@given(st.lists(st.tuples(NAMES, st.binary(max_size=3000)), max_size=6, unique_by=lambda m: m[0]))
def test_members_read_back_in_order(members):
    got = _read(_write(members))
    assert [(n, d) for n, d, _ in got] == members
    assert all(t == (2026, 12, 2, 17, 30, 8) for _, _, t in got)


def test_members_copied_from_files(tmp_path):
    members = [("[Content_Types].xml", b"<Types/>"), ("xl/worksheets/sheet1.xml", b"<row>" * 5000),
               ("xl/styles.xml", b""), ("xl/worksheets/sheet2.xml", bytes(range(256)) * 40)]
    assert [(n, d) for n, d, _ in _read(_write(members, tmp_path))] == members


@pytest.mark.parametrize("limit,count", [(1, 0xFFFF), (10**9, 2)])
def test_zip64_fields_and_end_records(monkeypatch, tmp_path, limit, count):
    # every size and offset past the limit (or the member count past its own): the ZIP64 forms are written
    monkeypatch.setattr(zip_archive, "LIMIT", limit)
    monkeypatch.setattr(zip_archive, "COUNT_LIMIT", count)
    members = [("a.xml", b"x" * 5000), ("b/c.xml", b"hello"), ("d.bin", b"")]
    blob = _write(members, tmp_path)
    assert (b"PK\x06\x06" in blob) == (limit == 1 or count == 2)      # the ZIP64 end record
    assert [(n, d) for n, d, _ in _read(blob)] == members
