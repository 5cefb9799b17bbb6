"""A baseline per dataset: from a folder of baseline files, or the policy file's [baselines] table.

The naming rule (docs/gate.md, "A root of several datasets"): a dataset's baseline in a folder
is the file `<stem><suffix>`, where the stem is the dataset's name with each `/` written as `.`
(`readings`, `crm.orders`, `stations.parquet`; the dataset `.`, a root's own files, is named
after the root's folder) and the suffix names the kind: `.schema.json`
(a JSON Schema), `.rules.json` (a cast-rules file) or `.report.json` (a saved scan report).
The file's kind is still told from its content, as for one baseline file.

The policy file may name them instead, relative to itself:

    [baselines]
    readings = "contracts/readings.schema.json"
    "crm/orders" = "contracts/orders.report.json"

and say what happens to the datasets no baseline names, and to a file that changed dataset:

    [datasets]
    no_baseline = "warn"       # or "fail"
    changed_dataset = "warn"   # "allow", "warn" or "fail"

>>> file_stem("crm/orders"), file_stem("stations.parquet")
('crm.orders', 'stations.parquet')
"""

from __future__ import annotations

import os
import tomllib
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from driftline.core.validation import check_document, pointer
from driftline.errors import InputPathError, OptionError, PolicyError

BASELINE_SUFFIXES = (".schema.json", ".rules.json", ".report.json")
NO_BASELINE = ("warn", "fail")
CHANGED_DATASET = ("allow", "warn", "fail")


def file_stem(name: str, root_name: str = ".") -> str:
    """A dataset's name as the stem of its files: each '/' becomes '.'; the dataset '.' (a root's
    own files) is named after the root's folder (root_name)."""
    return root_name if name == "." else name.replace("/", ".")


@dataclass(frozen=True, slots=True)
class DatasetRules:
    """What the policy file says about datasets: their baselines (name → path, resolved against
    the policy file's folder), and the actions for a dataset no baseline names and for a file
    that changed dataset since the state file was written."""

    baselines: Mapping[str, str] = field(default_factory=dict)
    no_baseline: str = "warn"
    changed_dataset: str = "warn"
    source: str = ""  # the policy file (its path), when there is one


def dataset_rules(data: Mapping[str, Any], *, folder: str, source: str, path: str = "") -> DatasetRules:
    """The [baselines] and [datasets] tables of a parsed policy file (the schema checked them)."""
    table = data.get("baselines", {})
    baselines = {str(k): os.path.join(folder, str(v)) for k, v in table.items()}
    switches = data.get("datasets", {})
    for key, allowed in (("no_baseline", NO_BASELINE), ("changed_dataset", CHANGED_DATASET)):
        value = switches.get(key, "warn")
        if value not in allowed:
            raise PolicyError(
                f"{source} at {pointer(['datasets', key])}: {key} has the value {value!r}; "
                f"allowed values: {', '.join(allowed)}"
            )
    return DatasetRules(
        baselines,
        switches.get("no_baseline", "warn"),
        switches.get("changed_dataset", "warn"),
        path,
    )


def load_dataset_rules(path: str | os.PathLike[str]) -> DatasetRules:
    """The dataset tables of a policy file (load_policy has read and checked the file first)."""
    try:
        data = tomllib.loads(Path(path).read_bytes().decode("utf-8"))
    except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError) as exc:  # pragma: no cover - load_policy said so
        raise PolicyError(f"cannot read policy file {os.fspath(path)!r}: {exc}") from None
    data.pop("output", None)
    source = f"policy file {os.fspath(path)!r}"
    check_document(data, "policy", "policy file", repr(os.fspath(path)))
    return dataset_rules(data, folder=os.path.dirname(os.path.abspath(path)), source=source, path=os.fspath(path))


@dataclass(frozen=True, slots=True)
class Assigned:
    """Each dataset's baseline file (None: no baseline names it), and the baselines that name
    no dataset of the root ((name or file stem, path))."""

    baselines: Mapping[str, str | None]
    unmatched: tuple[tuple[str, str], ...]
    source: str  # where they came from: the folder, or the policy file


def folder_baselines(folder: str) -> dict[str, str]:
    """The baseline files of a folder by stem (file name less its suffix); InputPathError when two
    files give one stem (readings.schema.json beside readings.report.json)."""
    out: dict[str, str] = {}
    try:
        names = sorted(os.listdir(folder))
    except OSError as exc:
        raise InputPathError(f"cannot read the baseline folder {folder!r}: {exc.strerror}") from None
    for name in names:
        suffix = next((s for s in BASELINE_SUFFIXES if name.endswith(s) and len(name) > len(s)), None)
        path = os.path.join(folder, name)
        if suffix is None or not os.path.isfile(path):
            continue
        stem = name[: -len(suffix)]
        if stem in out:
            raise InputPathError(
                f"two baselines for one dataset in {folder!r}: {os.path.basename(out[stem])} and {name}; keep one"
            )
        out[stem] = path
    return out


def assign(
    names: Sequence[str],
    found: Sequence[str],
    *,
    folder: str | None = None,
    mapping: Mapping[str, str] | None = None,
    source: str = "",
    root_name: str = ".",
) -> Assigned:
    """The baseline of each dataset named (names), from a folder (by the naming rule) or a mapping
    (by name); the baselines naming none of the datasets found in the root are unmatched.

    >>> a = assign(["a", "b"], ["a", "b", "c"], mapping={"a": "/x/a.schema.json", "old": "/x/old.json"})
    >>> dict(a.baselines), a.unmatched
    ({'a': '/x/a.schema.json', 'b': None}, (('old', '/x/old.json'),))
    """
    if folder is not None:
        files = folder_baselines(folder)
        stems: dict[str, list[str]] = {}
        for n in found:
            stems.setdefault(file_stem(n, root_name), []).append(n)
        clash = next((ns for ns in stems.values() if len(ns) > 1), None)
        if clash is not None:
            raise OptionError(
                f"datasets {', '.join(map(repr, clash))} share the baseline file name "
                f"{file_stem(clash[0], root_name)!r}: name their baselines in the policy file's [baselines] table"
            )
        chosen: dict[str, str | None] = {n: files.get(file_stem(n, root_name)) for n in names}
        unmatched = tuple((stem, path) for stem, path in files.items() if stem not in stems)
        return Assigned(chosen, unmatched, folder)
    table = dict(mapping or {})
    chosen = {n: table.get(n) for n in names}
    return Assigned(chosen, tuple((n, p) for n, p in table.items() if n not in set(found)), source)
