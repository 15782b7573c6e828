"""reportgen.inputs.files and reportgen.inputs.csvread: file reading helpers."""
from __future__ import annotations

from pathlib import Path

from reportgen.inputs.csvread import read_csv
from reportgen.inputs.files import (
    as_written,
    decode_text,
    parse_yaml,
    read_bytes,
    resolve_inside,
    shown_path,
    size_in_mb,
)


def test_size_in_mb_rounds_up():
    assert (size_in_mb(2**20), size_in_mb(2**20 + 1), size_in_mb(0)) == (1, 2, 0)


def test_read_bytes_refuses_large_file_without_reading(tmp_path):
    path = tmp_path / "big.csv"
    with path.open("wb") as handle:
        handle.truncate(3 * 2**20)
    data, problems = read_bytes(path, "big.csv", max_bytes=2 * 2**20)
    assert data is None
    assert [str(problem) for problem in problems] == [
        "big.csv: expected a file of at most 2 MB; this file is 3 MB"]


def test_decode_text_accepts_bom_and_names_the_line_of_a_bad_byte():
    assert decode_text("\ufeffa,b\n".encode("utf-8"), "x.csv") == ("a,b\n", [])
    text, problems = decode_text(b"a\nb\nc\xff\n", "x.csv")
    assert text is None
    assert [str(problem) for problem in problems] == [
        "x.csv, line 3: expected UTF-8 text (save the file as UTF-8) (got 'byte 0xFF')"]


def test_yaml_keeps_numbers_as_written_and_reports_duplicates():
    data, problems = parse_yaml("serial: 00417\nloss: 1.50\nserial: 7\n", "p.yaml")
    assert [str(problem) for problem in problems] == [
        "p.yaml, line 3, serial: expected each key once in its mapping (first given on line 1)"]
    assert data["serial"] == 7 and as_written(data["loss"]) == "1.50"
    data, _ = parse_yaml("serial: 00417\n", "p.yaml")
    assert data["serial"] == 0o417 and as_written(data["serial"]) == "00417"  # YAML 1.1 octal int


def test_yaml_syntax_error_has_line_and_column():
    _, problems = parse_yaml("a: b: c\n", "p.yaml")
    assert [str(problem) for problem in problems] == [
        "p.yaml, line 1, column 5: expected valid YAML (got 'mapping values are not allowed here')"]


def test_resolve_inside(tmp_path):
    root = tmp_path.resolve()
    (root / "sub").mkdir()
    assert resolve_inside(root, "sub/../a.txt") == root / "a.txt"
    assert resolve_inside(root, "../a.txt") is None
    assert resolve_inside(root, "/etc/passwd") is None
    (root / "link").symlink_to(tmp_path.parent)
    assert resolve_inside(root, "link/x") is None
    assert shown_path(root, root / "sub" / "f.csv") == "sub/f.csv"


def _write(tmp_path: Path, text: str) -> Path:
    path = tmp_path / "t.csv"
    path.write_bytes(text.encode("utf-8"))
    return path


def test_read_csv_columns_lines_and_blank_rows(tmp_path):
    path = _write(tmp_path, "\n A ,b,Extra\r\n1, x ,e\r\n,,\r\n\r\n\"2\n2\",y\r\n3,z,e,\r\n")
    table, problems = read_csv(path, "t.csv", required=[("a",)], optional=["b"])
    assert problems == []
    assert table.columns == {"a": ["1", "2\n2", "3"], "b": ["x", "y", "z"]}
    assert table.lines == [3, 6, 8]


def test_read_csv_tab_separated(tmp_path):
    path = _write(tmp_path, "a\tb\n1\t2\n")
    table, problems = read_csv(path, "t.csv", required=[("a",)], optional=[])
    assert table is None
    assert [str(problem) for problem in problems] == [
        "t.csv, line 1: expected comma-separated values with a decimal point in numbers "
        "(file looks tab-separated; export it again as comma-separated CSV)"]
