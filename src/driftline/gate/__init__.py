"""The gate: compare what a scan found with a baseline under a policy, and say pass or fail.

baseline.py  what was agreed (JSON Schema, cast rules or a saved report) → Baseline
policy.py    what to do with each kind of change → Policy
compare.py   Profile × Baseline × Policy → Violations, judged into a Verdict
verdict.py   Verdict and its JSON, JUnit XML and terminal renderings
diff.py      two profiles (or consecutive partitions) → the fields that changed
state.py     the incremental state file: unchanged files are not read again
inputs.py    a side of a check or diff: a Profile, a saved report, or paths to scan
run.py       the check as one call: policy, baseline, (incremental) scan, compare
"""
