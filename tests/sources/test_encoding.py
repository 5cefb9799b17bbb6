"""Text encodings of CSV/TSV and JSON files (sources/encoding.py).

The reference for every encoding is Python's codecs module: each file is written with
str.encode in that encoding, and what driftline reads must be the text Python's codecs
decode from it, row for row.
"""

from __future__ import annotations

import codecs
import gzip
import io
import json
import subprocess
import sys
from pathlib import Path

import pytest

import driftline
from conftest import ROOT
from driftline.core.files import FileResult
from driftline.core.options import ReadOptions
from driftline.core.stats import class_sample
from driftline.core.textfile import TextEncoding
from driftline.emit.terminal import encodings_line
from driftline.results.report import dumps, file_from_json, file_json, load_report
from driftline.sources.discover import discover
from driftline.sources.encoding import SAMPLE_BYTES, TextStream, codec_name, decide, utf8_evidence
from driftline.sources.readers import read_file
from driftline.sources.split import can_split

CORPUS = ROOT / "fixtures" / "corpus"

# Text with characters outside ASCII that every encoding below can write.
CSV_TEXT = "name,city,note\nRené,Köln,café\nZoë,Besançon,naïve\n"


def _read(path: Path, **opts: object) -> FileResult:
    return read_file(discover([str(path)]).files[0], ReadOptions(**opts))  # type: ignore[arg-type]


def _first_text(res: FileResult) -> dict[str, str]:
    """The earliest text value of each field that holds text, as the scan saw it (row 0 here)."""
    out = {}
    for name, st in res.observations[0].fields.items():
        ex = st.first(class_sample("text"))
        if ex is not None:
            assert ex.row == 0, name
            out[name] = json.loads(ex.value)
    return out


def _utf8_of(data: bytes, pin: str | None = None) -> tuple[bytes, TextEncoding]:
    text = TextStream(io.BufferedReader(io.BytesIO(data)), False, pin)  # type: ignore[arg-type]  # CSV text
    return text.stream.read(), text.encoding


# -- each encoding, written by Python's codecs ------------------------------------------------

# (how the file is written, the encoding driftline must name, how it finds it)
WRITTEN = [
    (lambda t: t.encode("utf-8"), "utf-8", "sample"),
    (lambda t: t.encode("utf-8-sig"), "utf-8", "bom"),
    (lambda t: codecs.BOM_UTF16_LE + t.encode("utf-16-le"), "utf-16-le", "bom"),
    (lambda t: codecs.BOM_UTF16_BE + t.encode("utf-16-be"), "utf-16-be", "bom"),
    (lambda t: codecs.BOM_UTF32_LE + t.encode("utf-32-le"), "utf-32-le", "bom"),
    (lambda t: codecs.BOM_UTF32_BE + t.encode("utf-32-be"), "utf-32-be", "bom"),
    (lambda t: t.encode("utf-16-le"), "utf-16-le", "nul-pattern"),
    (lambda t: t.encode("utf-16-be"), "utf-16-be", "nul-pattern"),
    (lambda t: t.encode("utf-32-le"), "utf-32-le", "nul-pattern"),
    (lambda t: t.encode("utf-32-be"), "utf-32-be", "nul-pattern"),
    (lambda t: t.encode("latin-1"), "windows-1252", "fallback"),
    (lambda t: t.encode("cp1252"), "windows-1252", "fallback"),
]
IDS = [
    "utf-8",
    "utf-8-bom",
    "utf-16le-bom",
    "utf-16be-bom",
    "utf-32le-bom",
    "utf-32be-bom",
    "utf-16le",
    "utf-16be",
    "utf-32le",
    "utf-32be",
    "latin-1",
    "cp1252",
]


@pytest.mark.parametrize(("write", "name", "evidence"), WRITTEN, ids=IDS)
def test_csv_in_each_encoding_reads_as_pythons_codecs_decode_it(tmp_path: Path, write, name: str, evidence: str):
    data = write(CSV_TEXT)
    f = tmp_path / "people.csv"
    f.write_bytes(data)
    res = _read(f)
    assert (res.encoding.name, res.encoding.evidence) == (name, evidence)  # type: ignore[union-attr]
    # source: Python's codecs (str.encode above); the header and rows as Python's csv reads the text
    assert res.rows == 2
    assert sorted(res.observations[0].fields) == ["city", "name", "note"]  # (fields are kept sorted)
    assert _first_text(res) == {"name": "René", "city": "Köln", "note": "café"}
    assert res.errors == 0
    warned = [i.kind for i in res.issues if i.severity == "warning"]
    assert (
        warned
        == {
            "sample": [],
            "bom": [],  # a BOM is recorded in the encoding, not warned of: RFC 4180 says nothing of it
            "nul-pattern": ["encoding"],
            "fallback": ["encoding"],
        }[evidence]
    )


@pytest.mark.parametrize(("write", "name", "evidence"), WRITTEN, ids=IDS)
def test_the_utf8_stream_is_the_text_pythons_codecs_decode(write, name: str, evidence: str):
    data = write(CSV_TEXT * 3)
    got, enc = _utf8_of(data)
    assert enc.name == name
    # source: Python's codecs: the file decoded in the encoding it was written in, BOM dropped
    # (a UTF-8 BOM is passed on: the readers report and skip it)
    expect = CSV_TEXT * 3
    assert got == (codecs.BOM_UTF8 if evidence == "bom" and name == "utf-8" else b"") + expect.encode("utf-8")


def test_windows_1252_decodes_every_byte_as_the_whatwg_index_says():
    data = bytes(range(256))
    got, _ = _utf8_of(data, pin=None)
    text = got.decode("utf-8")
    holes = {0x81, 0x8D, 0x8F, 0x90, 0x9D}
    # source: WHATWG Encoding Standard, index-windows-1252: the code page's characters
    # (Python's cp1252 codec) and, for the five bytes it leaves unassigned, the C1 control
    # of the same value (Python's latin-1 codec)
    expect = "".join(bytes([b]).decode("latin-1" if b in holes else "cp1252") for b in range(256))
    # (the NUL pattern does not apply: 1 NUL in 256 bytes is not the pattern of ASCII text)
    assert text == expect
    assert text[0x80] == "\u20ac" and text[0x93] == "\u201c" and text[0x81] == "\x81"


# -- the decision ----------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("head", "name", "bom"),
    [
        # source: Unicode Standard, section 23.8 (byte order marks); codecs.BOM_* hold the same bytes
        (b"\xef\xbb\xbfa,b\n", "utf-8", 0),
        (b"\xff\xfea\x00", "utf-16-le", 2),
        (b"\xfe\xff\x00a", "utf-16-be", 2),
        (b"\xff\xfe\x00\x00a\x00\x00\x00", "utf-32-le", 4),
        (b"\x00\x00\xfe\xff\x00\x00\x00a", "utf-32-be", 4),
    ],
)
def test_a_byte_order_mark_decides(head: bytes, name: str, bom: int):
    assert decide(head, whole=True) == TextEncoding(name, "bom", bom)


def test_utf32_le_mark_wins_over_utf16_le_whose_mark_it_starts_with():
    # source: Unicode Standard, section 23.8: FF FE 00 00 is the UTF-32 LE mark
    assert decide(codecs.BOM_UTF32_LE + "x".encode("utf-32-le"), whole=True).name == "utf-32-le"


@pytest.mark.parametrize(
    "head",
    [
        b"123\x00",  # JSON test suite n_multidigit_number_then_00: one NUL after UTF-8 digits
        b"[\x00]",  # n_structure_null-byte-outside-string: an odd length is not UTF-16
        b"a,b\n1,2\x00\x00\x00\x00\n",  # NUL padding in a UTF-8 file
    ],
)
def test_a_few_nul_bytes_are_not_the_pattern_of_utf16(head: bytes):
    assert decide(head, whole=True).name == "utf-8"


def test_utf8_with_one_stray_byte_stays_utf8():
    # common practice: valid multi-byte characters are evidence of UTF-8; one bad byte is damage
    head = "name,city\nRené,Köln\n".encode() + b"Zo\xeb,Paris\n"
    assert utf8_evidence(head, whole=True) == (1, 2)
    assert decide(head, whole=True) == TextEncoding("utf-8", "sample")


def test_high_bytes_without_any_valid_utf8_are_windows_1252():
    # a lone 0xE9 between ASCII letters is not UTF-8 (Unicode Standard section 3.9, table 3-7:
    # E9 must be followed by two continuation bytes)
    assert utf8_evidence(b"Jos\xe9,1\n", whole=True) == (1, 0)
    assert decide(b"Jos\xe9,1\n", whole=True) == TextEncoding("windows-1252", "fallback")
    # JSON must be UTF-8 (RFC 8259 section 8.1): no fallback, the bytes stay malformed JSON
    assert decide(b"Jos\xe9,1\n", whole=True, fallback=False).name == "utf-8"


def test_a_character_cut_by_the_end_of_the_head_is_not_counted():
    head = b"a" * 10 + "é".encode()[:1]  # the sample ends inside a two-byte character
    assert utf8_evidence(head, whole=False) == (0, 0)
    assert utf8_evidence(head, whole=True) == (1, 0)


# -- what a scan reports ---------------------------------------------------------------------


def test_utf8_file_with_one_bad_byte_has_one_invalid_utf8_problem(tmp_path: Path):
    f = tmp_path / "a.csv"
    f.write_bytes("name,city\nRené,Köln\n".encode() + b"Zo\xeb,Paris\n")
    res = _read(f)
    assert res.encoding == TextEncoding("utf-8", "sample")
    assert [(i.kind, i.line, i.byte_offset) for i in res.issues] == [
        ("invalid-utf8", 3, len("name,city\nRené,Köln\nZo".encode()))
    ]
    assert res.rows == 2


def test_latin1_file_warns_and_reads_every_value(tmp_path: Path):
    f = tmp_path / "legacy.csv"
    f.write_bytes(CSV_TEXT.encode("latin-1"))
    res = _read(f)
    (warning,) = res.issues
    assert (warning.kind, warning.severity, warning.line) == ("encoding", "warning", 1)
    assert "read as windows-1252" in warning.message and "--encoding" in warning.message


def test_pinned_encoding_is_used_whatever_the_bytes_say(tmp_path: Path):
    f = tmp_path / "euro.csv"
    f.write_bytes("price,cur\n5,€\n".encode("cp1252"))  # € is byte 0x80 in windows-1252
    found = _read(f)
    assert _first_text(found) == {"cur": "€"}
    # source: Python's latin-1 codec maps 0x80 to the C1 control U+0080
    latin = _read(f, encoding="latin-1")
    assert latin.encoding == TextEncoding("iso8859-1", "pinned")
    assert _first_text(latin) == {"cur": "\x80"} and latin.issues == ()
    as_utf8 = _read(f, encoding="UTF8")
    assert as_utf8.encoding == TextEncoding("utf-8", "pinned")
    assert [(i.kind, i.line) for i in as_utf8.issues] == [("invalid-utf8", 2)]


def test_an_unknown_encoding_is_a_usage_error(tmp_path: Path):
    f = tmp_path / "a.csv"
    f.write_text("a\n1\n")
    for name in ("no-such-codec", "base64"):
        res = subprocess.run(
            [sys.executable, "-m", "driftline.cli", "scan", str(f), "--encoding", name],
            capture_output=True,
            text=True,
            timeout=120,
        )
        assert res.returncode == 2
        assert f"'{name}' is not a text encoding" in res.stderr and "Traceback" not in res.stderr
        with pytest.raises(ValueError, match="is not a text encoding"):
            driftline.scan(f, encoding=name)
    assert codec_name("Latin-1") == "iso8859-1"  # source: Python's codecs.lookup


def test_lines_stay_exact_and_byte_offsets_are_left_out_in_a_transcoded_file(tmp_path: Path):
    f = tmp_path / "r.csv"
    f.write_bytes(codecs.BOM_UTF16_LE + "a,b\nä,1\nö,2,3\nü,4\n".encode("utf-16-le"))
    res = _read(f)
    assert [(i.kind, i.line, i.byte_offset) for i in res.issues] == [("ragged-row", 3, None)]
    assert res.rows == 2


def test_undecodable_utf16_is_reported_on_its_line(tmp_path: Path):
    f = tmp_path / "s.csv"
    # source: Unicode Standard section 3.9 (D91): a lone high surrogate is ill-formed UTF-16
    body = "a,b\n1,2\n".encode("utf-16-le") + b"3\x00,\x00\x00\xd8\n\x00" + "4,5\n".encode("utf-16-le")
    f.write_bytes(codecs.BOM_UTF16_LE + body)
    res = _read(f)
    assert [(i.kind, i.line) for i in res.issues] == [("invalid-text", 3)]
    assert res.rows == 3 and res.errors == 1


def test_utf16_json_lines_are_read_with_a_warning(tmp_path: Path):
    f = tmp_path / "e.jsonl"
    f.write_bytes(codecs.BOM_UTF16_BE + '{"ville": "Besançon"}\n{"ville": \n{"ville": "Köln"}\n'.encode("utf-16-be"))
    res = _read(f)
    assert res.encoding == TextEncoding("utf-16-be", "bom", 2)
    assert [(i.kind, i.severity, i.line) for i in res.issues] == [
        ("encoding", "warning", 1),
        ("malformed-json", "error", 2),
    ]
    assert "RFC 8259 section 8.1" in res.issues[0].message
    assert res.rows == 2 and _first_text(res) == {"ville": "Besançon"}


def test_a_compressed_utf16_file_is_transcoded_after_decompression(tmp_path: Path):
    f = tmp_path / "p.csv.gz"
    f.write_bytes(gzip.compress(CSV_TEXT.encode("utf-16")))  # source: Python's utf-16 codec writes a BOM
    res = _read(f)
    assert res.encoding.name in ("utf-16-le", "utf-16-be") and res.rows == 2  # type: ignore[union-attr]
    assert _first_text(res) == {"name": "René", "city": "Köln", "note": "café"}


def test_the_report_carries_the_encoding_and_loads_it_back(tmp_path: Path):
    from jsonschema import Draft202012Validator

    (tmp_path / "a.csv").write_bytes(CSV_TEXT.encode("utf-16"))
    (tmp_path / "b.csv").write_bytes(CSV_TEXT.encode("latin-1"))
    (tmp_path / "c.jsonl").write_text('{"x": 1}\n')
    profile = driftline.scan(tmp_path)
    report = json.loads(dumps(profile))
    assert [f["encoding"] for f in report["files"]] == [
        {"name": "utf-16-le", "evidence": "bom", "bom": 2},
        {"name": "windows-1252", "evidence": "fallback", "bom": 0},
        {"name": "utf-8", "evidence": "sample", "bom": 0},
    ]
    schema = json.loads((ROOT / "docs" / "report.schema.json").read_text())
    Draft202012Validator(schema).validate(report)  # source: JSON Schema 2020-12
    (tmp_path / "r.json").write_bytes(dumps(profile))
    assert load_report(tmp_path / "r.json") == profile
    assert file_from_json(file_json(profile.files[0])).encoding == TextEncoding("utf-16-le", "bom", 2)
    assert encodings_line(profile) == (
        "text encodings: 1 file utf-8; a.csv utf-16-le (byte order mark); b.csv windows-1252 (not UTF-8)"
    )


# -- the corpus (fixtures/corpus/csvkit, MIT): exact values ----------------------------------


@pytest.mark.parametrize(
    ("path", "name"),
    [
        ("csvkit/test_latin1.csv", "windows-1252"),
        ("csvkit/test_utf16_little.csv", "utf-16-le"),
        ("csvkit/test_utf16_big.csv", "utf-16-be"),
    ],
)
def test_corpus_files_read_the_values_pythons_codecs_read(path: str, name: str):
    f = CORPUS / path
    res = _read(f)
    # source: Python's codecs and csv module: latin-1 / utf-16 (the BOM says the byte order)
    codec = "latin-1" if "latin1" in path else "utf-16"
    import csv

    rows = list(csv.reader(io.StringIO(f.read_bytes().decode(codec), newline="")))
    assert res.encoding.name == name and res.errors == 0  # type: ignore[union-attr]
    assert sorted(res.observations[0].fields) == sorted(rows[0])
    last = {k: st.first(class_sample("text")) for k, st in res.observations[0].fields.items()}
    assert {k: json.loads(ex.value) for k, ex in last.items() if ex} == {"c": rows[2][2]}
    assert rows[2][2] == ("©" if codec == "latin-1" else "ʤ")


# -- bounded memory, and the split readers ---------------------------------------------------

_PROBE = (
    "import json, sys, tracemalloc\n"
    "from driftline.sources.discover import discover\n"
    "from driftline.sources.readers import read_file\n"
    "from driftline.core.options import ReadOptions\n"
    "tracemalloc.start()\n"
    "res = read_file(discover([sys.argv[1]]).files[0], ReadOptions(max_record_bytes=2**20))\n"
    "print(json.dumps({'rows': res.rows, 'errors': res.errors, 'enc': res.encoding.name,\n"
    "  'py': tracemalloc.get_traced_memory()[1]}))\n"
)


def _peak(path: Path) -> dict:
    """Read one file in a fresh process: rows, errors, encoding and Python's peak memory."""
    done = subprocess.run(
        [sys.executable, "-c", _PROBE, str(path)], check=True, capture_output=True, text=True, timeout=280
    )
    return json.loads(done.stdout)


@pytest.mark.timeout(300)
def test_a_large_utf16_file_streams_in_bounded_memory(tmp_path: Path):
    rows = 1_000_000
    line = "{i},Zoë Besançon,{j}.5\n"
    files = {}
    for enc, bom in (("utf-16-le", codecs.BOM_UTF16_LE), ("utf-8", b"")):
        files[enc] = f = tmp_path / f"big-{enc}.csv"
        with open(f, "wb") as out:
            out.write(bom + "id,name,v\n".encode(enc))
            for start in range(0, rows, 50_000):
                out.write("".join(line.format(i=i, j=i % 97) for i in range(start, start + 50_000)).encode(enc))
    utf16, utf8 = _peak(files["utf-16-le"]), _peak(files["utf-8"])
    assert (utf16["rows"], utf16["errors"], utf16["enc"]) == (rows, 0, "utf-16-le")
    assert (utf8["rows"], utf8["errors"], utf8["enc"]) == (rows, 0, "utf-8")
    # The UTF-16 file is 22 MiB larger than the same rows in UTF-8; transcoding a chunk at a
    # time costs a few MiB more memory than reading the UTF-8 file, not the file's size.
    extra = files["utf-16-le"].stat().st_size - files["utf-8"].stat().st_size
    assert extra > 20 * 2**20
    assert utf16["py"] - utf8["py"] < 8 * 2**20, (utf16, utf8)
    # and the split readers leave it to the one reader (spans are cut as UTF-8 bytes)
    big = discover([str(files["utf-16-le"])]).files[0]
    assert not can_split(big, ReadOptions())
    assert can_split(big, ReadOptions(encoding="utf-8"))  # the encoding is what decides (pinned here)
    assert SAMPLE_BYTES == 64 * 1024


def test_a_utf16_file_without_a_known_extension_is_sniffed_as_csv(tmp_path: Path):
    f = tmp_path / "export"
    f.write_bytes(CSV_TEXT.encode("utf-16"))  # source: Python's utf-16 codec (BOM, native order)
    res = driftline.scan(f).files[0]
    assert (res.format, res.rows, res.errors) == ("csv", 2, 0)
    assert _first_text(res) == {"name": "René", "city": "Köln", "note": "café"}


def test_apply_reads_raw_values_in_the_files_encoding(tmp_path: Path):
    from driftline.recommendation.raw import iter_records, raw_batches

    f = tmp_path / "people.csv"
    f.write_bytes(CSV_TEXT.encode("utf-16-be"))
    (batch,) = list(raw_batches(f))
    # source: Python's codecs: the text decoded from UTF-16 BE; raw cells are the 'text' child
    assert batch.batch.column(1).to_pylist() == [{"text": "Köln"}, {"text": "Besançon"}]
    assert [rec["note"] for _, _, rec in iter_records(f)] == ["café", "naïve"]
