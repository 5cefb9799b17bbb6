"""One options value for every verb and every library call that reads data: ScanOptions.

The library's keyword arguments, the command line's flags and a project config file all
use one vocabulary of flat names (``batch_rows``, ``where``, ``endpoint_url`` ...). They are
normalised once, here, into a frozen ScanOptions: read options and limits (ReadOptions),
the files to take (include, exclude, partition conditions), how to run (jobs, engine,
timeouts), how to reach an object store (StorageOptions) and how example values appear
(ValuePolicy). Every value is checked on the way in: a bad one is an OptionError naming
the option (and the config file it came from), before any file is read.

Precedence is a flag (or keyword) over the config file over the default.  The config file
is ``driftline.toml`` in the current folder, else the ``[tool.driftline]`` table of
``pyproject.toml`` there (driftline.toml wins when both exist), or the file given with
``--config``; its tables are:

    [scan]       the read options, by the names of the keyword arguments of driftline.scan
    [output]     example_values, hash_key_file (relative to the config file's folder)
    [recommend]  the options of driftline schema (RecommendOptions)
    [check]      the policy of driftline check (flat policy keys), when --policy is not given

>>> opts = ScanOptions().merged(batch_rows=500, where=["day>=2026-11-01"], delimiter=";")
>>> opts.read.batch_rows, [str(c) for c in opts.where], opts.read.delimiter, opts.jobs
(500, ['day>=2026-11-01'], ';', 1)
>>> ScanOptions().merged(batch_rows=0)
Traceback (most recent call last):
driftline.errors.OptionError: batch_rows must be an integer from 1 to 1,099,511,627,776, got 0
"""

from __future__ import annotations

import dataclasses
import difflib
import math
import os
import tomllib
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Literal, TypedDict

from driftline.core.bytesize import exact_bytes, parse_bytes
from driftline.core.codecnames import codec_name
from driftline.core.dialectpin import parse_pin
from driftline.core.jsontypes import JSONValue
from driftline.core.partitions import Condition, parse_condition
from driftline.core.ranges import RANGES, check
from driftline.core.valuepolicy import OUTPUT_KEYS, ValuePolicy, value_policy, values_from_table
from driftline.errors import DriftlineError, OptionError, PolicyError

Engine = Literal["local", "dask"]
ENGINES: tuple[Engine, ...] = ("local", "dask")
# One process unless asked: no worker pool is started behind a library call (a pool needs a
# `__main__` guard where processes are spawned), and results never depend on it.
DEFAULT_BATCH_ROWS = 65_536


DEFAULT_MAX_RECORD_BYTES = 64 * 1024 * 1024


DEFAULT_MAX_DECOMPRESSED_BYTES = 64 * 1024**3


# Deflate cannot pass about 1,032:1, so real data stays far below this; bombs (zeros in
# bz2/zstd/xz, or a Parquet footer promising gigabytes from a few kilobytes) go above it.
DEFAULT_MAX_DECOMPRESSION_RATIO = 1000


RATIO_FLOOR_BYTES = 16 * 1024 * 1024  # the ratio is only judged past this many bytes out


# Each column costs its own pass per batch (about 1.5 ms, measured with 2 rows), so 100,000
# columns would take minutes per batch and memory grows with rows times columns.
DEFAULT_MAX_COLUMNS = 10_000


# A batch also ends once its records' bytes reach this: parsed JSON takes about ten times its
# text in memory, so batch_rows alone let a batch of long records grow to gigabytes.
DEFAULT_BATCH_BYTES = 64 * 1024 * 1024


# Distinct field paths one batch keeps (in the order they first show); the paths past it are
# counted as "other fields".  Records with a key per id would otherwise grow without bound.
DEFAULT_MAX_PATHS = 10_000


@dataclass(frozen=True, slots=True)
class ReadOptions:
    """Options every reader honours. Keyword-only, with safe defaults.

    batch_rows              at most this many rows per batch
    batch_bytes             a batch also ends once its records' input bytes reach this (bounds memory)
    max_paths               distinct field paths kept per batch and per scan; the rest are "other fields"
    max_record_bytes        a longer JSON line / document / CSV line is reported, not read
    max_decompressed_bytes  stop a compressed file past this many bytes (decompression bombs)
    max_decompression_ratio stop once bytes out / bytes in exceeds this, past RATIO_FLOOR_BYTES
                            out (streams as they decompress; Parquet row groups by their footer)
    delimiter               CSV delimiter; None finds it (sources/dialect.py)
    csv_dialects            pins of the CSV dialect, '[GLOB:]KEY=VALUE[,KEY=VALUE…]' each (parse_pin);
                            what a pin leaves open is still found from the data
    encoding                text encoding of CSV/TSV/JSON files (a name Python's codecs know);
                            None finds it per file from its first bytes (sources/encoding.py)
    exact                   take the exact per-record path everywhere (no columnar fast path);
                            the results are the same, only slower: for checking the fast path

    >>> ReadOptions(batch_rows=50_000).batch_rows
    50000
    >>> ReadOptions(batch_rows=0)
    Traceback (most recent call last):
    driftline.errors.OptionError: batch_rows must be an integer from 1 to 1,099,511,627,776, got 0
    """

    batch_rows: int = DEFAULT_BATCH_ROWS
    max_record_bytes: int = DEFAULT_MAX_RECORD_BYTES
    max_decompressed_bytes: int = DEFAULT_MAX_DECOMPRESSED_BYTES
    delimiter: str | None = None
    max_decompression_ratio: float = DEFAULT_MAX_DECOMPRESSION_RATIO
    max_columns: int = DEFAULT_MAX_COLUMNS
    exact: bool = False
    batch_bytes: int = DEFAULT_BATCH_BYTES
    max_paths: int = DEFAULT_MAX_PATHS

    csv_dialects: tuple[str, ...] = ()
    encoding: str | None = None

    def __post_init__(self) -> None:
        for name in (
            "batch_rows",
            "batch_bytes",
            "max_record_bytes",
            "max_decompressed_bytes",
            "max_decompression_ratio",
            "max_columns",
            "max_paths",
        ):
            check(name, getattr(self, name))
        if self.encoding is not None:
            try:
                codec_name(self.encoding)
            except ValueError as exc:  # a name Python's codecs do not know
                raise OptionError(str(exc)) from None
        for spec in self.csv_dialects:
            parse_pin(spec)  # a bad pin is an error before any file is read
        if self.delimiter is not None:
            # a name ('tab', 'pipe') or a typed escape ('\\t') as --csv-dialect takes it
            try:
                delimiter = parse_pin(f"delimiter={_typed(self.delimiter)}").delimiter
            except PolicyError:
                raise PolicyError(
                    f"--delimiter {self.delimiter!r}: give one punctuation character or a name "
                    "(comma, tab, semicolon, pipe, colon, caret, tilde, space)"
                ) from None
            object.__setattr__(self, "delimiter", delimiter)


def _typed(delimiter: str) -> str:
    return {"\\t": "tab", "\t": "tab", " ": "space", ",": "comma"}.get(delimiter, delimiter)


DEFAULT_TASK_TIMEOUT = 3600.0  # seconds: --task-timeout


DEFAULT_MAX_EVENTS = 200  # drift events the terminal lists; the JSON report and Profile.events hold them all


DEFAULT_RETRIES = 4


DEFAULT_CONNECT_TIMEOUT = 10.0  # seconds to open a connection


DEFAULT_REQUEST_TIMEOUT = 20.0  # seconds a request may go without receiving a byte


@dataclass(frozen=True, slots=True)
class StorageOptions:
    """How to reach the object store; nothing here is a secret.

    >>> StorageOptions(endpoint_url="http://127.0.0.1:9000").endpoint()
    ('http', '127.0.0.1:9000')
    """

    endpoint_url: str | None = None  # e.g. http://127.0.0.1:9000; else AWS_ENDPOINT_URL_S3 / AWS_ENDPOINT_URL
    region: str | None = None  # else AWS_REGION / AWS_DEFAULT_REGION
    anonymous: bool = False  # public buckets: sign no request
    retries: int = DEFAULT_RETRIES  # attempts per request, with the SDK's exponential back-off
    connect_timeout: float = DEFAULT_CONNECT_TIMEOUT  # per attempt
    request_timeout: float = DEFAULT_REQUEST_TIMEOUT  # per attempt: no byte for this long ends it

    def __post_init__(self) -> None:
        if self.retries < 1:
            raise DriftlineError(f"retries must be at least 1, got {self.retries}")
        for name in ("connect_timeout", "request_timeout"):
            value = getattr(self, name)
            if not 0 < value <= 86_400:
                raise DriftlineError(f"--{name.replace('_', '-')} must be between 0 and 86400 seconds, got {value}")

    def shown(self) -> str:
        """The endpoint for messages: the URL given, or the AWS default."""
        scheme, host = self.endpoint()
        return f"{scheme}://{host}" if host else "the AWS endpoint of the region"

    def endpoint(self) -> tuple[str | None, str | None]:
        url = self.endpoint_url or os.environ.get("AWS_ENDPOINT_URL_S3") or os.environ.get("AWS_ENDPOINT_URL")
        if not url:
            return None, None
        scheme, sep, rest = url.partition("://")
        if not sep:
            return "https", url.rstrip("/")
        return scheme, rest.rstrip("/")


DEFAULT_JOBS = 1
CONFIG_NAME = "driftline.toml"
PYPROJECT = "pyproject.toml"
MAX_TIMEOUT_S = {"connect_timeout": 86_400, "request_timeout": 86_400, "task_timeout": 10_000_000}


class ScanKeywords(TypedDict, total=False):
    """The read options as keyword arguments (of driftline.scan, check, diff, recommend) and
    as keys of a config file's [scan] table; a name left out keeps its value (or default)."""

    batch_rows: int
    batch_bytes: int | str  # a byte size: 67108864, or with a unit, "64 MiB" (core/bytesize.py)
    max_record_bytes: int | str
    max_decompressed_bytes: int | str
    max_decompression_ratio: float
    max_columns: int
    max_paths: int
    delimiter: str
    csv_dialect: str | Sequence[str]
    encoding: str
    include: str | Sequence[str]
    exclude: str | Sequence[str]
    include_hidden: bool
    sniff_unknown: bool
    follow_links: bool
    where: str | Sequence[str]
    jobs: int
    max_errors: int
    max_events: int
    engine: Engine
    scheduler: str
    task_timeout: float
    endpoint_url: str
    region: str
    anonymous: bool
    connect_timeout: float
    request_timeout: float
    example_values: Literal["show", "hide", "hash"]
    hash_key: bytes | str
    hash_key_file: str | os.PathLike[str]


# Where each flat name goes: the ReadOptions, the StorageOptions, the ValuePolicy or ScanOptions itself.
READ_KEYS = (
    "batch_rows",
    "batch_bytes",
    "max_record_bytes",
    "max_decompressed_bytes",
    "max_decompression_ratio",
    "max_columns",
    "max_paths",
    "delimiter",
    "csv_dialect",
    "encoding",
)
STORAGE_KEYS = ("endpoint_url", "region", "anonymous", "connect_timeout", "request_timeout")
VALUE_KEYS = ("example_values", "hash_key", "hash_key_file")
OWN_KEYS = (
    "include",
    "exclude",
    "include_hidden",
    "sniff_unknown",
    "follow_links",
    "where",
    "jobs",
    "max_errors",
    "max_events",
    "engine",
    "scheduler",
    "task_timeout",
)
KEYWORDS: tuple[str, ...] = tuple(ScanKeywords.__annotations__)
assert set(KEYWORDS) == {*READ_KEYS, *STORAGE_KEYS, *VALUE_KEYS, *OWN_KEYS}
_GLOBS = ("include", "exclude", "where", "csv_dialect")
_FLAGS = ("include_hidden", "sniff_unknown", "follow_links", "anonymous")
_TEXTS = ("delimiter", "encoding", "scheduler", "endpoint_url", "region", "engine", "example_values")
_SECONDS = ("connect_timeout", "request_timeout", "task_timeout")
_LIMITS = ("jobs", "max_errors", "max_events")
BYTE_KEYS = ("batch_bytes", "max_record_bytes", "max_decompressed_bytes")  # a number, or text with a unit


def _byte_size(name: str, value: str) -> int:
    """A byte option written with a unit ('64 MiB'), as a number of bytes within its range.

    >>> _byte_size("batch_bytes", "64 MiB")
    67108864
    >>> _byte_size("batch_bytes", "2 GiB")
    Traceback (most recent call last):
    driftline.errors.OptionError: batch_bytes = '2 GiB' is 2,147,483,648 bytes, outside 1 B..1 GiB
    """
    try:
        n = parse_bytes(value)
    except ValueError as exc:
        raise OptionError(f"{name} = {exc}") from None
    low, high = RANGES[name]
    if not low <= n <= high:
        raise OptionError(
            f"{name} = {value!r} is {n:,} bytes, outside {exact_bytes(int(low))}..{exact_bytes(int(high))}"
        )
    return n


def _strings(value: object, name: str) -> tuple[str, ...]:
    """A glob or condition list: one string, or a sequence of strings."""
    if isinstance(value, str):
        return (value,)
    if isinstance(value, Sequence) and all(isinstance(v, str) for v in value):
        return tuple(value)
    raise OptionError(f"{name} must be a string or a list of strings, got {value!r}")


def _checked(name: str, value: object) -> object:
    """One flat option value of the right type (and range, for numbers); OptionError naming it."""
    if name in _GLOBS:
        return _strings(value, name)
    if name in _FLAGS:
        if not isinstance(value, bool):
            raise OptionError(f"{name} must be true or false, got {value!r}")
        return value
    if name in _TEXTS:
        if not isinstance(value, str):
            raise OptionError(f"{name} must be a string, got {value!r}")
        if name == "engine" and value not in ENGINES:
            raise OptionError(f"unknown engine {value!r}; choose local or dask")
        return value
    if name in _SECONDS:
        top = MAX_TIMEOUT_S[name]
        ok = isinstance(value, int | float) and not isinstance(value, bool) and math.isfinite(value)
        if not ok or not 0 < value <= top:  # type: ignore[operator]
            raise OptionError(f"--{name.replace('_', '-')} must be between 0 and {top} seconds, got {value!r}")
        return float(value)  # type: ignore[arg-type]
    if name in BYTE_KEYS and isinstance(value, str):
        return _byte_size(name, value)
    if name in _LIMITS or name in READ_KEYS:
        return check(name, value)
    if name == "hash_key" and not isinstance(value, bytes | str):
        raise OptionError(f"hash_key must be bytes or a string, got {type(value).__name__}")
    if name == "hash_key_file" and not isinstance(value, str | os.PathLike):
        raise OptionError(f"hash_key_file must be a path, got {value!r}")
    return value


def _unknown(name: str, known: Sequence[str], where: str) -> OptionError:
    close = difflib.get_close_matches(name, known, n=1)
    hint = f" (did you mean {close[0]!r}?)" if close else ""
    return OptionError(f"{where}unknown option {name!r}{hint}; known options: {', '.join(sorted(known))}")


@dataclass(frozen=True, slots=True, kw_only=True)
class ScanOptions:
    """How data is found and read: the one options value every verb and library call takes.

    Build it with ScanOptions().merged(**keywords) (the flat names of ScanKeywords, checked
    and normalised), or from a config file with ScanOptions.from_file(path); it never
    changes after. paths are the locations (local paths, globs or s3:// URLs).

    >>> o = ScanOptions().merged(paths=["landing/"], include="*.csv", jobs=2, anonymous=True)
    >>> o.paths, o.include, o.jobs, o.storage.anonymous, o.read.batch_rows
    (('landing/',), ('*.csv',), 2, True, 65536)
    """

    paths: tuple[str, ...] = ()
    read: ReadOptions = ReadOptions()
    include: tuple[str, ...] = ()
    exclude: tuple[str, ...] = ()
    include_hidden: bool = False
    sniff_unknown: bool = False
    follow_links: bool = False
    where: tuple[Condition, ...] = ()
    jobs: int = DEFAULT_JOBS
    max_errors: int | None = None
    max_events: int = DEFAULT_MAX_EVENTS
    engine: Engine = "local"
    scheduler: str | None = None
    storage: StorageOptions = StorageOptions()
    task_timeout: float = DEFAULT_TASK_TIMEOUT
    values: ValuePolicy = field(default_factory=ValuePolicy)

    def __post_init__(self) -> None:
        # Normalised once: sequences become tuples, condition texts Conditions, every value checked.
        fix = {
            "paths": tuple(os.fspath(p) for p in _paths(self.paths)),
            "include": _strings(self.include, "include"),
            "exclude": _strings(self.exclude, "exclude"),
            "where": tuple(w if isinstance(w, Condition) else parse_condition(w) for w in _conditions(self.where)),
        }
        for name, value in fix.items():
            object.__setattr__(self, name, value)
        for name in ("include_hidden", "sniff_unknown", "follow_links", "jobs", "max_events", "engine", "task_timeout"):
            _checked(name, getattr(self, name))
        if self.max_errors is not None:
            check("max_errors", self.max_errors)
        if self.scheduler is not None:
            _checked("scheduler", self.scheduler)
        for name, kind in (("read", ReadOptions), ("storage", StorageOptions), ("values", ValuePolicy)):
            if not isinstance(getattr(self, name), kind):
                raise OptionError(f"{name} must be a {kind.__name__}, got {getattr(self, name)!r}")

    def merged(self, *, source: str | None = None, **keywords: object) -> ScanOptions:
        """A copy with the given flat options (ScanKeywords, and paths) changed; None leaves one as it is.

        source names where the values came from (a config file) in an error message.
        """
        where = f"{source}: " if source else ""
        given = {k: v for k, v in keywords.items() if v is not None}
        for name in given:
            if name not in KEYWORDS and name != "paths":
                raise _unknown(name, KEYWORDS, where)
        try:
            checked = {k: v if k == "paths" else _checked(k, v) for k, v in given.items()}
            return self._merge(checked)
        except OptionError as exc:
            raise OptionError(f"{where}{exc}") from None
        except DriftlineError as exc:
            raise type(exc)(f"{where}{exc}") from None
        except ValueError as exc:  # a text encoding Python's codecs do not know
            raise OptionError(f"{where}{exc}") from None

    def _merge(self, given: Mapping[str, Any]) -> ScanOptions:
        read = {("csv_dialects" if k == "csv_dialect" else k): v for k, v in given.items() if k in READ_KEYS}
        storage = {k: v for k, v in given.items() if k in STORAGE_KEYS}
        own = {k: v for k, v in given.items() if k in OWN_KEYS or k == "paths"}
        changes: dict[str, Any] = dict(own)
        if read:
            changes["read"] = dataclasses.replace(self.read, **read)
        if storage:
            changes["storage"] = dataclasses.replace(self.storage, **storage)
        if any(k in given for k in VALUE_KEYS):
            mode = given.get("example_values", self.values.mode)
            key = given.get("hash_key", self.values.key)
            changes["values"] = value_policy(mode, key, given.get("hash_key_file"))
        return dataclasses.replace(self, **changes) if changes else self

    @staticmethod
    def from_file(path: str | os.PathLike[str]) -> ScanOptions:
        """The options of a config file's [scan] and [output] tables (driftline.toml or pyproject.toml).

        >>> import tempfile, pathlib
        >>> f = pathlib.Path(tempfile.mkdtemp()) / "driftline.toml"
        >>> _ = f.write_text('[scan]\\ndelimiter = ";"\\nwhere = ["day>=2"]\\n')
        >>> o = ScanOptions.from_file(f)
        >>> o.read.delimiter, [str(c) for c in o.where]
        (';', ['day>=2'])
        """
        return load_config(path).scan_options()

    def to_report(self) -> dict[str, JSONValue]:
        """The options a report records: batch_rows, the globs, and each limit that differs from its default."""

        out: dict[str, JSONValue] = {"batch_rows": self.read.batch_rows, "include": list(self.include)}
        out["exclude"] = list(self.exclude)
        # Only the limits that differ from their defaults: a report of a default scan stays as it was.
        if self.read.batch_bytes != DEFAULT_BATCH_BYTES:
            out["batch_bytes"] = self.read.batch_bytes
        if self.read.max_paths != DEFAULT_MAX_PATHS:
            out["max_paths"] = self.read.max_paths
        if self.follow_links:
            out["follow_links"] = True
        return out


def _paths(value: object) -> tuple[Any, ...]:
    if isinstance(value, str | os.PathLike):
        return (value,)
    if isinstance(value, Sequence) and all(isinstance(v, str | os.PathLike) for v in value):
        return tuple(value)
    raise OptionError(f"paths must be a path, a glob, a URL or a list of them, got {value!r}")


def _conditions(value: object) -> tuple[Any, ...]:
    if isinstance(value, str | Condition):
        return (value,)
    if isinstance(value, Sequence):
        return tuple(value)
    raise OptionError(f"where must be a condition or a list of them, got {value!r}")


# -- the config file ------------------------------------------------------------------------

# The [scan] table takes the keyword arguments, except what has a home of its own: example
# values in [output], and the hash key itself, which never belongs in a file.
SCAN_TABLE_KEYS = tuple(k for k in KEYWORDS if k not in VALUE_KEYS)
TABLES = ("scan", "output", "recommend", "check")


@dataclass(frozen=True, slots=True)
class Config:
    """The tables of one config file (empty when there is none); source names it in messages."""

    source: str | None = None  # "config file 'driftline.toml'", as messages name it
    folder: str = "."
    file: str | None = None  # the file itself (source may add the table of a pyproject.toml)
    scan: Mapping[str, Any] = field(default_factory=dict)
    output: Mapping[str, Any] = field(default_factory=dict)
    recommend: Mapping[str, Any] = field(default_factory=dict)
    check: Mapping[str, Any] = field(default_factory=dict)

    def where(self, table: str) -> str:
        return f"{self.source} [{table}]"

    def values(self) -> ValuePolicy | None:
        """The [output] table's example-values policy, or None when it sets none."""
        if not self.output:
            return None
        return values_from_table(self.output, self.folder, self.where("output"))

    def scan_options(self, base: ScanOptions | None = None) -> ScanOptions:
        """base (the defaults when None) with this file's [scan] and [output] tables applied."""
        opts = (base or ScanOptions()).merged(source=self.where("scan"), **self.scan) if self.scan else base
        opts = opts or ScanOptions()
        values = self.values()
        return dataclasses.replace(opts, values=values) if values is not None else opts


def find_config(folder: str | os.PathLike[str] = ".") -> Path | None:
    """driftline.toml in folder, else pyproject.toml there when it has a [tool.driftline] table."""
    own = Path(folder) / CONFIG_NAME
    if own.is_file():
        return own
    project = Path(folder) / PYPROJECT
    if project.is_file():
        try:
            doc = tomllib.loads(project.read_text(encoding="utf-8"))
        except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError):
            return None  # not ours to judge: only a [tool.driftline] table makes it a config
        if isinstance(doc.get("tool"), dict) and "driftline" in doc["tool"]:
            return project
    return None


def load_config(path: str | os.PathLike[str] | None) -> Config:
    """The tables of a config file (its [tool.driftline] table for a pyproject.toml); an unknown
    table or key is an OptionError naming it and the file. None gives the empty Config."""
    if path is None:
        return Config()
    source = os.fspath(path)
    try:
        text = Path(source).read_bytes().decode("utf-8")
        doc = tomllib.loads(text)
    except OSError as exc:
        raise OptionError(f"cannot read config file {source!r}: {exc.strerror}") from None
    except UnicodeDecodeError as exc:
        raise OptionError(f"config file {source!r} is not UTF-8 text (byte {exc.start})") from None
    except tomllib.TOMLDecodeError as exc:
        raise OptionError(f"config file {source!r} is not valid TOML: {exc}") from None
    label = f"config file {source!r}"
    if Path(source).name == PYPROJECT:
        doc = doc.get("tool", {}).get("driftline", {}) if isinstance(doc.get("tool"), dict) else {}
        label = f"{label} [tool.driftline]"
    for key, value in doc.items():
        if key not in TABLES:
            close = difflib.get_close_matches(key, TABLES, n=1)
            hint = f" (did you mean [{close[0]}]?)" if close else ""
            raise OptionError(
                f"{label}: unknown key {key!r}{hint}; a config file has the tables "
                + ", ".join(f"[{t}]" for t in TABLES)
            )
        if not isinstance(value, dict):
            raise OptionError(f"{label}: {key!r} must be a table ([{key}])")
    config = Config(
        source=label,
        folder=os.path.dirname(os.fspath(path)),
        file=os.fspath(path),
        scan=doc.get("scan", {}),
        output=doc.get("output", {}),
        recommend=doc.get("recommend", {}),
        check=doc.get("check", {}),
    )
    _check_tables(config)
    return config


def _check_tables(config: Config) -> None:
    """Every key of every table known and every value good, before anything is read."""
    for key in config.scan:
        if key not in SCAN_TABLE_KEYS:
            home = " (it belongs in [output])" if key in VALUE_KEYS else ""
            if home:
                raise OptionError(f"{config.where('scan')}: unknown key {key!r}{home}")
            raise _unknown(key, SCAN_TABLE_KEYS, f"{config.where('scan')}: ")
    config.scan_options()
    for key in config.output:
        if key not in OUTPUT_KEYS:
            raise OptionError(f"{config.where('output')}: unknown key {key!r}; allowed keys: {', '.join(OUTPUT_KEYS)}")
    # [recommend] and [check] are checked by their own modules where a verb loads the file
    # (cli/read_flags.options_of): this floor knows only the scan's own tables.
