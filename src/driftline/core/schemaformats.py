"""The names of the schema files `driftline schema --to` writes and of the SQL dialects of
`--dialect`: names alone, free of the recommender, the writers and sqlglot, so that a verb's
--help lists them without importing those (tests/api/test_imports.py)."""

from __future__ import annotations

from typing import Literal, get_args

#: The schema files of `driftline schema --to`.
SchemaFormat = Literal["json-schema", "arrow", "arrow-text", "sql", "avro", "iceberg", "spark"]
#: What Recommendation.write writes: a schema file, or the cast rules (`--rules`).
OutputFormat = SchemaFormat | Literal["rules"]
#: JSON Schema of the records as they arrive (permissive), or after the cast rules (strict).
JsonMode = Literal["permissive", "strict"]
FORMATS: tuple[SchemaFormat, ...] = get_args(SchemaFormat)

#: The dialects of `--dialect`, as sqlglot names them.
SqlDialect = Literal["duckdb", "postgres", "spark", "trino", "bigquery", "snowflake", "sqlite"]
DIALECTS: tuple[str, ...] = get_args(SqlDialect)
#: DuckDB: it runs in-process, checks every type name, and reads the staging data straight from files.
DEFAULT_DIALECT: SqlDialect = "duckdb"
