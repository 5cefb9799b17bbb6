"""`driftline apply`: a landing folder cast with the recommended rules into a typed Parquet table,
a quarantine of every value a rule nulls or changes, and a reconciliation of every row.

run.py orchestrates (files → partitions → batches), output.py writes each partition under a
temporary name and renames it into place, quarantine.py turns what apply() touched into rows
with their provenance, reconcile.py compares the outcome with the recommendation's prediction,
rulesfile.py reads a saved rules file back as a Recommendation, delta.py writes a Delta table,
objectstore.py writes to an s3:// prefix (each file uploaded whole under its final key).
"""
