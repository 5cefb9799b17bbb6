"""Each file `driftline schema` writes, by format: the one function the CLI and Recommendation share.

``schema_file(rec, "sql", table="raw")`` is the exact bytes of ``driftline schema --to sql
--table raw``; ``write_file`` writes them (or the cast rules) where a person expects
(emit.atomic).
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import get_args

from driftline.core.schemaformats import FORMATS as FORMATS
from driftline.emit.atomic import write_output
from driftline.emit.schemas import arrow_schema, avro, iceberg, json_schema, rules_json, spark
from driftline.emit.schemas import sql as sql_file
from driftline.errors import OptionError
from driftline.recommendation.plan import JsonMode, OutputFormat, Recommendation, SchemaFormat

#: The formats of --to, in the order --help lists them.


def default_name(rec: Recommendation) -> str:
    """The table (SQL), record (Avro) and title (JSON Schema) name when none is given: the root folder's.

    >>> from driftline.recommendation.options import RecommendOptions
    >>> default_name(Recommendation("/data/landing", 0, 0, (), RecommendOptions()))
    'landing'
    """
    return Path(rec.root).name or "records"


def schema_file(
    rec: Recommendation,
    to: SchemaFormat,
    *,
    table: str | None = None,
    json_mode: JsonMode | None = None,
    dialect: str | None = None,
    flatten: str | None = None,
    bounds_from_sample: bool = False,
) -> bytes:
    """The file `driftline schema --to TO [--table TABLE] [--json-mode MODE] [--bounds-from-sample]` writes.

    table names the SQL table, the Avro record and the JSON Schema's title (default: the
    root folder's name); json_mode defaults to the recommendation's mode; bounds_from_sample
    makes the JSON Schema enforce the longest string and the number range seen, and SQL write
    VARCHAR(n) of the longest value seen (by default they are only described). For SQL, dialect
    (default duckdb) and flatten (struct fields as columns joined by this separator).

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n')
    >>> print(schema_file(driftline.scan(d).recommend(), "sql", table="t").decode().split("\\n\\n")[1])
    CREATE TABLE "t" (
      "x" BIGINT NOT NULL
    );
    """
    name = table or default_name(rec)
    if to == "json-schema":
        mode = json_mode or rec.options.mode
        if mode not in get_args(JsonMode):
            raise OptionError(f"json_mode must be permissive or strict, got {mode!r}")
        doc = json_schema.json_schema(rec, mode=mode, title=name, bounds_from_sample=bounds_from_sample)
        return json_schema.dumps(doc)
    if to == "arrow":
        return arrow_schema.ipc_bytes(rec)
    if to == "arrow-text":
        return arrow_schema.schema_text(rec).encode()
    if to == "sql":
        return sql_file.script(
            rec,
            name,
            dialect=dialect or sql_file.DEFAULT_DIALECT,
            flatten=flatten,
            bounds_from_sample=bounds_from_sample,
        ).encode()
    if to == "avro":
        return avro.dumps(avro.avro_schema(rec, name=avro.avro_name(name)))
    if to == "iceberg":
        return iceberg.dumps(iceberg.iceberg_document(rec))
    if to == "spark":
        return spark.dumps(spark.spark_schema(rec))
    raise OptionError(f"unknown schema format {to!r}; choose one of {', '.join(FORMATS)}")


def write_file(
    rec: Recommendation,
    path: str | os.PathLike[str],
    to: OutputFormat,
    *,
    table: str | None = None,
    json_mode: JsonMode | None = None,
    dialect: str | None = None,
    flatten: str | None = None,
    bounds_from_sample: bool = False,
) -> None:
    """Write a schema file (as schema_file) or, for to="rules", the cast rules file (--rules)."""
    if to == "rules":
        data = rules_json.dumps(rec, flatten=flatten)
    else:
        data = schema_file(
            rec,
            to,
            table=table,
            json_mode=json_mode,
            dialect=dialect,
            flatten=flatten,
            bounds_from_sample=bounds_from_sample,
        )
    write_output(os.fspath(path), data)
