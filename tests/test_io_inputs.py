"""Small input files (job, limits, transform, reports): each problem is one line naming the file."""

from __future__ import annotations

import json

import pytest

from bladesolid.errors import InputError
from bladesolid.io import check_input_file, read_json, read_toml


def one_line_about(path, exc) -> str:
    text = str(exc.value)
    assert text.startswith(f"{path}: ") and "\n" not in text, text
    return text


def test_toml_and_json_are_read(tmp_path):
    (tmp_path / "a.toml").write_text('units = "mm"\n[[operating_point]]\nrpm = 2500\n')
    assert read_toml(tmp_path / "a.toml", "job file") == {"units": "mm", "operating_point": [{"rpm": 2500}]}
    (tmp_path / "b.json").write_text(json.dumps({"schema": "x", "rows": [1, 2]}))
    assert read_json(tmp_path / "b.json", "report file") == {"schema": "x", "rows": [1, 2]}


@pytest.mark.parametrize("reader, text, words", [
    (read_toml, "units = \n", "not valid TOML"),
    (read_json, "{not json", "not valid JSON"),
    (read_toml, b"\xff\xfe units", "cannot be read"),
])
def test_broken_files_are_named(tmp_path, reader, text, words):
    p = tmp_path / "broken"
    p.write_bytes(text if isinstance(text, bytes) else text.encode())
    with pytest.raises(InputError) as exc:
        reader(p)
    assert words in one_line_about(p, exc)


def test_missing_and_oversized_files_are_refused_before_reading(tmp_path):
    with pytest.raises(InputError) as exc:
        read_toml(tmp_path / "none.toml", "limits file")
    assert one_line_about(tmp_path / "none.toml", exc).endswith("limits file not found")
    big = tmp_path / "big.json"
    big.write_text(" " * 2000 + "{}")
    with pytest.raises(InputError) as exc:
        read_json(big, "report file", max_bytes=1000)
    assert "larger than 0.001 MB" in one_line_about(big, exc)
    assert check_input_file(tmp_path / "big.json", "report file", 10_000) == str(big)
    with pytest.raises(InputError, match="transform file not found .give a file"):
        check_input_file(tmp_path / "t.txt", "transform file", 1000, " (give a file with a 4x4 matrix)")
