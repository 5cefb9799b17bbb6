"""Observe: one batch of records → an Observation (per field path statistics)."""
