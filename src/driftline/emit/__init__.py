"""Emit: reports and schema files out of a Profile (terminal, JSON, HTML, schema formats)."""
