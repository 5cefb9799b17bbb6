"""Regression cases for reader and observer bugs found by the conformance suites, fault
injection and fuzzing. Each case names how it was found; each would fail on the old code."""

from __future__ import annotations

import pyarrow as pa
import pyarrow.parquet as pq

from driftline.core.options import ReadOptions
from driftline.core.stats import NULL_SAMPLE, type_sample
from driftline.observe.fast.columnar import observe_table
from driftline.sources.discover import discover
from driftline.sources.formats import CountingRaw
from driftline.sources.readers import read_file


def _map_column() -> pa.Array:
    rows = [[(1, 2)], None, [(3, 4), (5, 6)], [(7, None)]]
    return pa.array(rows, pa.map_(pa.int32(), pa.int32()))


def test_map_column_is_observed_without_aborting_the_process(tmp_path):
    # found by: Parquet conformance suite, data/map_no_value.parquet. pyarrow 26.0.1
    # pc.list_parent_indices on a MapArray fails a C++ check and aborts the interpreter.
    f = tmp_path / "m.parquet"
    pq.write_table(pa.table({"m": _map_column()}), f)
    res = read_file(discover([str(f)]).files[0], ReadOptions())
    assert res.issues == ()
    fields = {p: st for o in res.observations for p, st in o.fields.items()}
    # source: pyarrow 26.0.1 to_pylist of the same column (4 rows, one null map, 4 entries)
    values = pq.read_table(f)["m"].to_pylist()
    entries = [kv for m in values if m is not None for kv in m]
    assert fields["m"].types == {"map": sum(m is not None for m in values)} == {"map": 3}
    assert fields["m"].nulls == 1
    assert fields["m"].items == len(entries) == 4
    assert fields["m{key}"].types == {"int32": 4}
    assert (fields["m{key}"].minimum, fields["m{key}"].maximum) == (1, 7)
    assert fields["m{value}"].types == {"int32": 3}
    assert fields["m{value}"].nulls == 1
    assert fields["m{value}"].first(NULL_SAMPLE).row == 3


def test_sliced_map_counts_only_the_entries_of_the_slice():
    # found by: review of the map fix; MapArray.keys ignores a slice's offset (pyarrow 26.0.1).
    sliced = _map_column().slice(1, 3)  # rows: None, [(3,4),(5,6)], [(7,None)]
    obs = observe_table(pa.table({"m": sliced}), file="f.parquet", batch=0, row_start=0)
    assert obs.fields["m"].items == 3
    assert obs.fields["m{key}"].types == {"int32": 3}
    assert (obs.fields["m{key}"].minimum, obs.fields["m{key}"].maximum) == (3, 7)
    assert obs.fields["m{key}"].first(type_sample("int32")).row == 1
    assert obs.fields["m{value}"].first(NULL_SAMPLE).row == 2


def _scan_one(path) -> tuple:
    res = read_file(discover([str(path)]).files[0], ReadOptions())
    fields = {p: st for o in res.observations for p, st in o.fields.items()}
    return res, fields


def test_nanosecond_timestamps_python_cannot_hold_are_profiled(tmp_path):
    # found by: Parquet conformance suite, data/int96_from_spark.parquet (INT96 read as
    # timestamp[ns]); as_py() and even str() of such a scalar raise ValueError.
    from datetime import datetime, timedelta

    f = tmp_path / "ns.parquet"
    pq.write_table(pa.table({"t": pa.array([1, 2 * 10**18 + 1, None], pa.timestamp("ns"))}), f)
    res, fields = _scan_one(f)
    assert res.issues == () and res.rows == 3
    assert fields["t"].types == {"timestamp[ns]": 2}
    # source: Python datetime arithmetic from the Unix epoch; the ns digit kept as text
    later = (datetime(1970, 1, 1) + timedelta(seconds=2 * 10**9)).isoformat()
    assert fields["t"].minimum == "1970-01-01T00:00:00.000000001"
    assert fields["t"].maximum == later + ".000000001" == "2033-05-18T03:33:20.000000001"
    assert "1970-01-01" in fields["t"].first(type_sample("timestamp[ns]")).value


def test_dates_past_year_9999_inside_a_struct_are_profiled(tmp_path):
    # found by: Parquet conformance suite, data/nested_structs.rust.parquet: a struct whose
    # example value held a date Python cannot build (OverflowError) stopped the whole file.
    from datetime import date

    last_python_day = (date(9999, 12, 31) - date(1970, 1, 1)).days  # source: Python datetime
    days = pa.array([last_python_day + 1], pa.date32())
    f = tmp_path / "d.parquet"
    pq.write_table(pa.table({"s": pa.StructArray.from_arrays([days, pa.array([1])], ["d", "n"])}), f)
    res, fields = _scan_one(f)
    assert res.issues == () and res.rows == 1
    # proleptic Gregorian: the day after 9999-12-31 is 10000-01-01
    assert fields["s.d"].minimum == fields["s.d"].maximum == "10000-01-01"
    assert fields["s"].first(type_sample("struct")).value == '{"d":"10000-01-01","n":1}'
    assert fields["s.n"].types == {"int64": 1}


# -- Parquet footers and limits ----------------------------------------------------------


def test_plaintext_footer_with_encrypted_columns_is_reported_not_aborted():
    # found by: Parquet conformance suite, encrypt_columns_plaintext_footer.parquet.encrypted.
    # Reading its column metadata (RowGroupMetaData.column, to_dict) aborts pyarrow 26.0.1.
    from hostile_inputs import PARQUET_SUITE

    f = PARQUET_SUITE / "data" / "encrypt_columns_plaintext_footer.parquet.encrypted"
    res = read_file(discover([str(f)]).files[0], ReadOptions())
    assert [(i.kind, i.severity) for i in res.issues] == [("encrypted", "error")]
    assert "decrypt" in res.issues[0].message and res.rows == 0
    # the footer is plain text, so the declared schema is still known
    # source: pyarrow 26.0.1 pq.read_schema of the same file
    from driftline.sources.parquetfile import declared_paths

    assert res.declared == declared_paths(pq.read_schema(f))


def test_row_group_declaring_a_bomb_ratio_is_skipped_before_decompressing(tmp_path):
    # found by: Parquet conformance suite, large_string_map.brotli.parquet: 2 GiB of strings
    # in a 4 KiB file took 17 s and then failed; the footer's sizes say so up front.
    from hostile_inputs import parquet_ratio_bomb

    f = tmp_path / "bomb.parquet"
    size = parquet_ratio_bomb(f)
    declared = pq.ParquetFile(f).metadata.row_group(0).total_byte_size
    assert declared > size and declared > 1000 * f.stat().st_size  # pyarrow's own footer
    res = read_file(discover([str(f)]).files[0], ReadOptions())
    assert [(i.kind, i.row) for i in res.issues] == [("too-large", 0)]
    assert f"declares {declared:,} decompressed bytes" in res.issues[0].message
    assert "--max-decompression-ratio" in res.issues[0].message and res.rows == 0
    # the same file with the limit raised is read whole: the guard only stopped it
    lenient = read_file(discover([str(f)]).files[0], ReadOptions(max_decompression_ratio=10**9))
    assert lenient.issues == () and lenient.rows == 200


def test_row_group_past_max_decompressed_bytes_is_skipped_and_the_others_read(tmp_path):
    f = tmp_path / "two.parquet"
    t = pa.table({"s": pa.array(["a" * 1000] * 20 + ["b"] * 20)})
    pq.write_table(t, f, row_group_size=20, use_dictionary=False)
    meta = pq.ParquetFile(f).metadata
    big, small = meta.row_group(0).total_byte_size, meta.row_group(1).total_byte_size
    assert big > 20_000 > small
    res = read_file(discover([str(f)]).files[0], ReadOptions(max_decompressed_bytes=10_000))
    assert [(i.kind, i.row) for i in res.issues] == [("too-large", 0)]
    assert res.rows == 20 and res.complete is False
    fields = {p: st for o in res.observations for p, st in o.fields.items()}
    assert fields["s"].max_length == 1  # only the second row group ('b' values) was read


def test_footer_declaring_more_rows_than_the_pages_hold_is_an_error(tmp_path):
    # found by: fault injection (footer num_rows patched to 2**62) and bad_data/ARROW-GH-41317,
    # where pyarrow's iter_batches silently returns fewer rows than the footer declares.
    from hostile_inputs import parquet_absurd_footers

    f = tmp_path / "rows.parquet"
    f.write_bytes(parquet_absurd_footers()["rows-2^62"])
    assert pq.ParquetFile(f).metadata.num_rows == 2**62  # source: pyarrow 26.0.1 reads the claim
    res = read_file(discover([str(f)]).files[0], ReadOptions())
    assert res.rows == 12_345
    assert [(i.kind, i.severity) for i in res.issues] == [("row-count", "error")]
    assert f"declares {2**62:,} rows but 12,345 could be read" in res.issues[0].message


# -- compressed streams and sniffing -----------------------------------------------------


def test_extensionless_file_with_a_corrupt_compressed_header_is_skipped_not_a_crash(tmp_path):
    # found by: fault injection. Sniffing a file whose name says nothing decoded its first
    # bytes and let zlib.error / ZstdError / LZMAError escape, which stopped discovery itself.
    magics = {"gz": b"\x1f\x8b", "bz": b"BZh9", "zst": b"\x28\xb5\x2f\xfd", "xz": b"\xfd7zXZ\x00"}
    for name, magic in magics.items():
        (tmp_path / f"upload-{name}").write_bytes(magic + b"\x00garbage, not a stream" * 4)
    (tmp_path / "good.jsonl").write_bytes(b'{"a": 1}\n')
    found = discover([str(tmp_path)])
    assert [f.rel for f in found.files] == ["good.jsonl"]
    assert sorted((s.rel, s.reason) for s in found.skipped) == [
        (f"upload-{n}", "unknown-format") for n in sorted(magics)
    ]


def test_encrypted_footer_magic_is_read_as_parquet_and_reported_encrypted():
    # found by: Parquet conformance suite: files with an encrypted footer end in "PARE"
    # (source: apache/parquet-format Encryption.md, "PARE" magic) and were skipped as
    # an unknown format instead of being reported.
    from hostile_inputs import PARQUET_SUITE

    f = PARQUET_SUITE / "data" / "uniform_encryption.parquet.encrypted"
    assert f.read_bytes()[-4:] == b"PARE"
    found = discover([str(f)])
    assert [(x.format, x.compression) for x in found.files] == [("parquet", None)]
    res = read_file(found.files[0], ReadOptions())
    assert [(i.kind, i.severity) for i in res.issues] == [("encrypted", "error")]
    assert "encrypted" in res.issues[0].message and res.rows == 0


def test_gzip_decoding_is_bounded_by_the_read_size_not_the_compressed_chunk(tmp_path):
    # found by: review of the gzip reader: zlib.decompress() of a 1 MiB compressed chunk of
    # a bomb returned ~1 GiB at once. Here 96 MiB of spaces (~95 KB compressed) stream
    # through with the ratio check off; memory stays near the record limit.
    import tracemalloc

    from hostile_inputs import compress, jsonl_lines

    f = tmp_path / "spaces.jsonl.gz"
    f.write_bytes(compress(jsonl_lines(10) + b" " * (96 * 2**20), "gzip"))
    tracemalloc.start()
    try:
        res = read_file(discover([str(f)]).files[0], ReadOptions(max_record_bytes=2**20, max_decompression_ratio=10**9))
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert res.rows == 10
    assert [(i.kind, i.line) for i in res.issues] == [("too-large", 11)]
    assert peak < 48 * 2**20, f"peak {peak / 2**20:.0f} MiB"


def test_a_stream_past_the_decompression_ratio_stops_and_keeps_the_rows_before(tmp_path):
    from hostile_inputs import compress, jsonl_lines

    for codec, suffix in (("bz2", ".bz2"), ("zstd", ".zst")):
        f = tmp_path / f"bomb.jsonl{suffix}"
        f.write_bytes(compress(jsonl_lines(1000) + b" " * (40 * 2**20), codec))
        res = read_file(discover([str(f)]).files[0], ReadOptions())
        assert res.rows == 1000 and res.complete is False, codec
        assert [i.kind for i in res.issues] == ["too-large"], codec
        assert "a ratio over 1,000:1 (--max-decompression-ratio)" in res.issues[0].message, codec


def _cut_in_half(tmp_path, codec: str, suffix: str, data: bytes) -> tuple:
    import lzma

    from hostile_inputs import compress

    packed = lzma.compress(data, preset=1) if codec == "xz" else compress(data, codec)
    f = tmp_path / f"cut.jsonl{suffix}"
    f.write_bytes(packed[: len(packed) // 2])
    return f, packed[: len(packed) // 2]


def test_truncated_xz_keeps_the_rows_decoded_before_the_cut(tmp_path):
    # found by: fault injection. LZMAFile.readinto fills the whole buffer and, on a cut-off
    # file, raises and drops what it had decoded in that call: 0 rows instead of ~10,000.
    import lzma

    from hostile_inputs import jsonl_lines

    f, cut = _cut_in_half(tmp_path, "xz", ".xz", jsonl_lines(20_000))
    decodable = lzma.LZMADecompressor().decompress(cut)  # source: CPython lzma, the reference
    res = read_file(discover([str(f)]).files[0], ReadOptions())
    assert res.rows == decodable.count(b"\n") > 5_000
    assert [i.kind for i in res.issues][-1] == "truncated"


def test_truncated_zstd_is_reported_not_read_as_complete(tmp_path):
    # found by: fault injection. zstandard's stream_reader ends a cut-off frame silently,
    # so a truncated .zst looked complete (and lost rows without a word when cut at a line end).
    import zstandard

    from hostile_inputs import jsonl_lines

    f, cut = _cut_in_half(tmp_path, "zstd", ".zst", jsonl_lines(50_000))
    decodable = zstandard.ZstdDecompressor().decompressobj().decompress(cut)  # the reference
    res = read_file(discover([str(f)]).files[0], ReadOptions())
    assert res.rows == decodable.count(b"\n")
    assert [i.kind for i in res.issues][-1] == "truncated" and res.complete is False
    # cut exactly at a line end: the loss is still reported
    whole = zstandard.ZstdCompressor().compress(jsonl_lines(1000))
    for n in range(len(whole) - 1, 0, -1):
        lines = zstandard.ZstdDecompressor().decompressobj().decompress(whole[:n])
        if lines.endswith(b"\n") and len(lines) < len(jsonl_lines(1000)):
            break
    f.write_bytes(whole[:n])
    res = read_file(discover([str(f)]).files[0], ReadOptions())
    assert res.rows == lines.count(b"\n") < 1000
    assert [i.kind for i in res.issues] == ["truncated"]


def test_concatenated_zstd_frames_are_all_read(tmp_path):
    # source: RFC 8878 §3.1: a zstd stream is a sequence of frames; all of them are data
    import zstandard

    from hostile_inputs import jsonl_lines

    f = tmp_path / "frames.jsonl.zst"
    f.write_bytes(b"".join(zstandard.ZstdCompressor().compress(jsonl_lines(n)) for n in (10, 20, 30)))
    res = read_file(discover([str(f)]).files[0], ReadOptions())
    assert res.rows == 60 and res.issues == ()


# -- CSV header and line limits ----------------------------------------------------------


def test_csv_header_longer_than_the_sniffed_head_is_read_whole(tmp_path):
    # found by: fault injection (a CSV with 100,000 columns). The header was parsed from the
    # first 64 KiB only, so a longer header lost its last columns and every row was "ragged".
    names = [f"c{i:03d}_" + "n" * 400 for i in range(200)]  # about 81 KB of header
    f = tmp_path / "wide.csv"
    f.write_text(",".join(names) + "\n" + ",".join(str(i) for i in range(200)) + "\n1,2\n")
    assert len(",".join(names)) > 64 * 1024
    res = read_file(discover([str(f)]).files[0], ReadOptions())
    fields = {p: st for o in res.observations for p, st in o.fields.items()}
    assert res.rows == 1 and len(fields) == 200
    assert fields[names[-1]].types == {"int64": 1}
    # the short row is still reported at its own line (3), as before the header change
    assert [(i.kind, i.line) for i in res.issues] == [("ragged-row", 3)]


def test_csv_with_more_columns_than_the_limit_is_reported_not_read(tmp_path):
    f = tmp_path / "w.csv"
    f.write_text(",".join(f"c{i}" for i in range(30)) + "\n" + ",".join("1" * 30) + "\n")
    res = read_file(discover([str(f)]).files[0], ReadOptions(max_columns=29))
    assert [(i.kind, i.line) for i in res.issues] == [("too-wide", 1)]
    assert "30 columns, more than 29 (--max-columns)" in res.issues[0].message and res.rows == 0
    assert read_file(discover([str(f)]).files[0], ReadOptions(max_columns=30)).rows == 1


def test_csv_line_past_max_record_bytes_stops_the_read_there_with_memory_bounded(tmp_path):
    # found by: fault injection. --max-record-bytes was documented for CSV but not applied:
    # a 1 GB line was handed to pyarrow whole. Memory is measured in a fresh process, as
    # pyarrow's own pool peak (max_memory) plus Python's (tracemalloc).
    import json
    import subprocess
    import sys

    f = tmp_path / "long.csv"
    f.write_bytes(b"a,b\n1,x\n2,y\n3," + b"z" * (48 * 2**20) + b"\n4,w\n")
    probe = (
        "import json, sys, tracemalloc, pyarrow as pa\n"
        "from driftline.sources.discover import discover\n"
        "from driftline.sources.readers import read_file\n"
        "from driftline.core.options import ReadOptions\n"
        "tracemalloc.start()\n"
        "res = read_file(discover([sys.argv[1]]).files[0], ReadOptions(max_record_bytes=2**20))\n"
        "print(json.dumps({'rows': res.rows, 'issues': [[i.kind, i.line, i.byte_offset] for i in res.issues],\n"
        "  'py': tracemalloc.get_traced_memory()[1], 'arrow': pa.default_memory_pool().max_memory()}))\n"
    )
    out = json.loads(
        subprocess.run(
            [sys.executable, "-c", probe, str(f)], check=True, capture_output=True, text=True, timeout=60
        ).stdout
    )
    assert out["rows"] == 2  # the rows before the long line are kept
    assert out["issues"] == [["too-large", 4, len(b"a,b\n1,x\n2,y\n")]]
    assert out["py"] < 16 * 2**20 and out["arrow"] < 24 * 2**20, out
    whole = read_file(discover([str(f)]).files[0], ReadOptions())
    assert whole.rows == 4 and whole.issues == ()


def test_csv_with_a_header_and_no_rows_is_an_empty_table_not_an_error(tmp_path):
    # found by: tests/properties/test_properties.py (hypothesis, a header-only CSV): once the header was
    # read whole, pyarrow saw no bytes at all and said "Empty CSV file".
    for name, data in (("h.csv", b"a,b\n"), ("h2.csv", b"a,b"), ("h3.csv", b"a,b\r\n\r\n")):
        (tmp_path / name).write_bytes(data)
        res = read_file(discover([str(tmp_path / name)]).files[0], ReadOptions())
        assert res.rows == 0 and res.errors == 0, (name, res.issues)


def test_remote_streams_use_the_local_decoders(monkeypatch):
    # found by: review. open_stream_remote had its own decoders with the bugs fixed above
    # (GzipFile dropping a cut read's bytes, zstd cut-offs read as complete). Now it is
    # formats.wrap_stream over the object stream; tested here over an in-memory object.
    import io
    import zlib

    import zstandard

    import driftline.sources.remote as remote
    from hostile_inputs import compress, jsonl_lines

    data = jsonl_lines(20_000)
    for codec in ("gzip", "zstd"):
        packed = compress(data, codec)
        cut = packed[: len(packed) // 2]
        ref_dec = zlib.decompressobj(wbits=31) if codec == "gzip" else zstandard.ZstdDecompressor().decompressobj()
        decodable = ref_dec.decompress(cut)  # the reference decoders

        def object_stream(path: str, b: bytes = cut) -> io.BufferedReader:
            return io.BufferedReader(CountingRaw(pa.BufferReader(b)))

        monkeypatch.setattr(remote, "open_binary", object_stream)
        stream = remote.open_stream_remote("s3://lake/x", codec, limit=2**30, ratio=1000)
        got = b""
        try:
            while chunk := stream.read1(1 << 16):
                got += chunk
        except EOFError:
            pass
        else:
            raise AssertionError(f"{codec}: a cut-off stream read as complete")
        assert got == decodable, codec
