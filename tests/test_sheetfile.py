"""calc.files: reading files (UTF-8, BOM, size, missing files)."""

from __future__ import annotations

import pytest

from calc import Sheet
from calc.errors import InputError
from calc.files import MAX_SHEET_BYTES, decode_sheet


def test_invalid_utf8_names_line_and_column(tmp_path):
    path = tmp_path / "bad.sheet"
    path.write_bytes(b"a = 1\nb = 2 \xff km\n")
    with pytest.raises(InputError) as info:
        Sheet.load(path)
    assert info.value.render().startswith(
        f"{path}:2:7: invalid UTF-8: byte 0xff cannot start or continue a character")


def test_bom_is_accepted():
    assert decode_sheet(b"\xef\xbb\xbfx = 1\n", "t").text == "x = 1\n"


def test_nul_byte_is_refused():
    with pytest.raises(InputError, match="NUL character"):
        decode_sheet(b"x = 1\x00\n", "t")


def test_oversized_sheet_is_refused():
    with pytest.raises(InputError, match="the limit is"):
        decode_sheet(b"#" * (MAX_SHEET_BYTES + 1), "t")


def test_missing_file(tmp_path):
    with pytest.raises(InputError, match="no such sheet"):
        Sheet.load(tmp_path / "none.sheet")
