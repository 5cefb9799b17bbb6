"""Schema files in open standards, written from a Recommendation.

json_schema   JSON Schema 2020-12 (permissive: the data as it arrives; strict: after the rules)
arrow_schema  Arrow IPC schema message, and its text form
sql           CREATE TABLE in one engine's dialect (sqlglot), a staging table, the rules as INSERT … SELECT
names         column names every engine accepts: one rule, each renaming listed
avro          Avro schema (nullable fields as ["null", T] with "default": null)
rules_json    the cast rules file (docs/rules.schema.json)
summary       the terminal view: the unified schema and each field's rule
"""
