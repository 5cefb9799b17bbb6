"""Object stores: discovering and opening `s3://bucket/prefix/` inputs through pyarrow.fs.

A remote FileRef.path is a *locator*: `s3://bucket/key`, plus a query string holding the
connection settings that are not secrets (endpoint, region, anonymous, retries), so that a
FileRef shipped to a dask worker opens the same object there. Credentials never enter a
locator, a report or a message: they come from the usual AWS environment variables
(AWS_ACCESS_KEY_ID, AWS_SECRET_ACCESS_KEY, AWS_SESSION_TOKEN, AWS_PROFILE, instance roles),
read by the AWS SDK inside pyarrow on the machine that opens the object.

Listing walks one folder level at a time (each level's ListObjectsV2 pages are followed by
the SDK), never lists a prefix twice and never descends into a key=value folder that a
--where condition rules out. Keys that are not paths (an empty, '.' or '..' part, as in
`a//b.jsonl`) cannot be opened through pyarrow.fs: their prefixes are counted as skipped.
Parquet is opened as a random-access file, so only the footer and the needed column chunks
are fetched with ranged GETs. Every request has a connect and a stall timeout; transient
errors are retried by the SDK's standard strategy (bounded attempts, exponential back-off).

Each object is read at one version: its ETag is taken when it is opened and compared after
the read (one more HEAD request); a difference, or a size or modification time other than
the listing's, is a "changed" problem, as for a local file rewritten during the scan.
"""

from __future__ import annotations

import fnmatch
import functools
import io
import os
from collections.abc import Iterator, Sequence
from dataclasses import dataclass
from typing import Any, BinaryIO
from urllib.parse import parse_qsl, quote, unquote, urlencode

from driftline.core.dataformat import Compression, Format
from driftline.core.fileref import REMOTE_SCHEMES
from driftline.core.files import Skipped
from driftline.core.options import DEFAULT_CONNECT_TIMEOUT, DEFAULT_REQUEST_TIMEOUT, DEFAULT_RETRIES, StorageOptions
from driftline.core.partitions import Condition, folder_passes, partitions_pass
from driftline.errors import InputPathError
from driftline.sources.discover import Discovery, FileRef, partition_values
from driftline.sources.formats import CountingRaw, IgnoredTail, detect_compression, wrap_stream
from driftline.sources.registry import FORMAT_BY_SUFFIX, detect_format, skip_reason

SCHEMES = REMOTE_SCHEMES


def is_url(path: str | os.PathLike[str]) -> bool:
    """Whether a scan input names an object store rather than a local path.

    >>> is_url("s3://bucket/landing/"), is_url("landing/")
    (True, False)
    """
    return isinstance(path, str) and path.startswith(SCHEMES)


def split_url(url: str) -> tuple[str, str]:
    """(bucket, key prefix without slashes at either end) of an s3:// URL.

    >>> split_url("s3://lake/landing/readings/")
    ('lake', 'landing/readings')
    """
    rest = url.split("://", 1)[1].split("?", 1)[0]
    bucket, _, key = rest.partition("/")
    if not bucket:
        raise InputPathError(f"{url!r} names no bucket; write s3://bucket/prefix/")
    return bucket, key.strip("/")


def locator(bucket: str, key: str, storage: StorageOptions) -> str:
    """The FileRef.path of one object: its URL plus the non-secret connection settings.

    >>> locator("lake", "day=1/a.jsonl", StorageOptions(region="eu-west-1"))
    's3://lake/day%3D1/a.jsonl?region=eu-west-1&retries=4'
    """
    settings: dict[str, str] = {}
    scheme, host = storage.endpoint()
    if host:
        settings["endpoint"] = f"{scheme}://{host}"
    region = _region(storage)
    if region:
        settings["region"] = region
    if storage.anonymous:
        settings["anonymous"] = "1"
    settings["retries"] = str(storage.retries)
    # Timeouts travel only when set, so the usual locator stays short.
    if storage.connect_timeout != DEFAULT_CONNECT_TIMEOUT:
        settings["connect_timeout"] = repr(storage.connect_timeout)
    if storage.request_timeout != DEFAULT_REQUEST_TIMEOUT:
        settings["request_timeout"] = repr(storage.request_timeout)
    return f"s3://{bucket}/{quote(key)}?{urlencode(settings)}"


def parse_locator(path: str) -> tuple[str, str, StorageOptions]:
    """Inverse of locator(): bucket, key and settings.

    >>> st = StorageOptions(anonymous=True, request_timeout=5)
    >>> _, key, back = parse_locator(locator("lake", "day=1/a b.jsonl", st))
    >>> key, back.anonymous, back.retries, back.request_timeout
    ('day=1/a b.jsonl', True, 4, 5.0)
    """
    rest, _, query = path.split("://", 1)[1].partition("?")
    bucket, _, key = rest.partition("/")
    q = dict(parse_qsl(query))
    storage = StorageOptions(
        endpoint_url=q.get("endpoint"),
        region=q.get("region"),
        anonymous=q.get("anonymous") == "1",
        retries=int(q.get("retries", DEFAULT_RETRIES)),
        connect_timeout=float(q.get("connect_timeout", DEFAULT_CONNECT_TIMEOUT)),
        request_timeout=float(q.get("request_timeout", DEFAULT_REQUEST_TIMEOUT)),
    )
    return bucket, unquote(key), storage


def _region(storage: StorageOptions) -> str | None:
    return storage.region or os.environ.get("AWS_REGION") or os.environ.get("AWS_DEFAULT_REGION")


@functools.lru_cache(maxsize=16)
def filesystem(storage: StorageOptions) -> Any:
    """One pyarrow S3FileSystem per set of settings (cached: the SDK client is costly to make)."""
    from pyarrow import fs

    scheme, host = storage.endpoint()
    kwargs: dict[str, Any] = {
        "anonymous": storage.anonymous,
        "retry_strategy": fs.AwsStandardS3RetryStrategy(max_attempts=max(1, storage.retries)),
        "connect_timeout": storage.connect_timeout,
        "request_timeout": storage.request_timeout,
        "region": _region(storage) or "us-east-1",
    }
    if host:
        kwargs["endpoint_override"] = host
        kwargs["scheme"] = scheme
    return fs.S3FileSystem(**kwargs)


# -- discovery --------------------------------------------------------------------------------


def discover_remote(
    urls: Sequence[str | os.PathLike[str]],
    *,
    storage: StorageOptions | None = None,
    include: Sequence[str] = (),
    exclude: Sequence[str] = (),
    include_hidden: bool = False,
    where: Sequence[Condition] = (),
) -> Discovery:
    """List the objects below s3:// URLs (all in one bucket and prefix family) as FileRefs."""
    storage = storage or StorageOptions()
    names = [str(os.fspath(u)) for u in urls]
    if not all(is_url(u) for u in names):
        raise InputPathError("scan local paths and s3:// URLs separately (one root per scan)")
    fs = filesystem(storage)
    roots = [split_url(u) for u in names]
    buckets = {b for b, _ in roots}
    if len(buckets) != 1:
        raise InputPathError(f"scan one bucket at a time; got {', '.join(sorted(buckets))}")
    bucket = roots[0][0]
    prefixes = [k for _, k in roots]
    root = _common_prefix(prefixes)
    files: dict[str, FileRef] = {}
    skipped: list[Skipped] = []
    for prefix in prefixes:
        for item in _walk(fs, bucket, prefix, where, url=f"s3://{bucket}/{prefix}", storage=storage):
            if isinstance(item, str):  # a key prefix that is not a path: counted, never opened
                skipped.append(Skipped(_below(item, root), "odd-key"))
                continue
            key, size, mtime_ns = item
            rel = key[len(root) :].lstrip("/") if root else key
            if not rel:  # the URL names one object: it is named by its file name, as locally
                rel, root = key.rsplit("/", 1)[-1], key.rpartition("/")[0]
            verdict = _filter_name(rel, include, exclude, include_hidden)
            if verdict is not None:
                skipped.append(Skipped(rel, verdict))
                continue
            if not partitions_pass(partition_values(rel), where):
                continue  # a file outside the --where partitions is not part of the scan
            path = locator(bucket, key, storage)
            fmt = _format(rel, path)
            if fmt is None:
                skipped.append(Skipped(rel, skip_reason(rel)))
                continue
            files[rel] = FileRef(
                path=path,
                rel=rel,
                partitions=partition_values(rel),
                format=fmt,
                compression=_compression(rel, path),
                size=size,
                mtime_ns=mtime_ns,
            )
    shown = f"s3://{bucket}/{root}".rstrip("/")
    ordered = tuple(files[k] for k in sorted(files))
    return Discovery(root=shown, files=ordered, skipped=tuple(sorted(set(skipped), key=lambda s: s.rel)))


def _below(key: str, root: str) -> str:
    """A key prefix relative to the root, its odd slashes kept (`landing//` below `landing` is `/`)."""
    if root and key.startswith(root + "/"):
        return key[len(root) + 1 :] or "/"
    return key


def _filter_name(rel: str, include: Sequence[str], exclude: Sequence[str], include_hidden: bool) -> str | None:
    """discover.py's rules for names, for objects (which are always regular files)."""
    if not include_hidden:
        for part in rel.split("/"):
            if part.startswith("."):
                return "hidden"
            if part.startswith("_"):
                return "marker"
    name = rel.rsplit("/", 1)[-1]

    def matches(patterns: Sequence[str]) -> bool:
        return any(fnmatch.fnmatchcase(rel, p) or fnmatch.fnmatchcase(name, p) for p in patterns)

    if exclude and matches(exclude):
        return "excluded"
    if include and not matches(include):
        return "not-included"
    return None


def _format(rel: str, path: str) -> Format | None:
    name = rel.rsplit("/", 1)[-1].lower()
    # The suffix usually decides; only a name that says nothing costs a request to sniff.
    for sfx in name.split(".")[1:]:
        if "." + sfx in FORMAT_BY_SUFFIX:
            return detect_format(rel)
    return detect_format(path)


def _compression(rel: str, path: str) -> Compression | None:
    found = detect_compression(rel)
    return found


def _common_prefix(prefixes: Sequence[str]) -> str:
    if len(prefixes) == 1:
        return prefixes[0]
    split = [p.split("/") for p in prefixes]
    common: list[str] = []
    for parts in zip(*split, strict=False):
        if len(set(parts)) != 1:
            break
        common.append(parts[0])
    return "/".join(common)


def _walk(
    fs: Any, bucket: str, prefix: str, where: Sequence[Condition], *, url: str, storage: StorageOptions
) -> Iterator[tuple[str, int, int] | str]:
    """Yield (key, size, mtime_ns) below prefix in sorted order, one folder level at a time,
    and, as a plain string, each key prefix that is not a path (see _odd).

    Each folder is listed once: pyarrow.fs folds `a//` into `a`, which listed `a` again
    without end before this set of listed folders.
    """
    from pyarrow import fs as pafs

    start = f"{bucket}/{prefix}".rstrip("/")
    listed: set[str] = set()
    stack = [start]
    while stack:
        folder = stack.pop()
        if folder in listed:
            continue
        listed.add(folder)
        try:
            infos = fs.get_file_info(pafs.FileSelector(folder, recursive=False, allow_not_found=True))
        except (OSError, ValueError) as exc:
            raise InputPathError(f"cannot list {url}: {explain(exc, storage)}") from exc
        if folder == start and not infos:
            # A prefix that names one object rather than a folder.
            try:
                info = fs.get_file_info(start)
            except (OSError, ValueError) as exc:
                raise InputPathError(f"cannot list {url}: {explain(exc, storage)}") from exc
            if info.type == pafs.FileType.File:
                yield prefix, info.size or 0, _mtime(info)
                return
            raise InputPathError(f"{url} holds no object; check the bucket and prefix")
        subfolders = []
        for info in sorted(infos, key=lambda i: i.path):
            odd = _odd(folder, info.path)
            if odd is not None:
                yield odd[len(bucket) + 1 :]
                continue
            key = info.path[len(bucket) + 1 :]
            if info.type == pafs.FileType.Directory:
                if info.path not in listed and folder_passes(info.base_name, where):
                    subfolders.append(info.path)
            elif info.type == pafs.FileType.File:
                yield key, info.size or 0, _mtime(info)
        stack.extend(reversed(subfolders))


def _odd(folder: str, path: str) -> str | None:
    """The key prefix (with bucket) behind a listing entry that is not a child path, else None.

    pyarrow.fs reports the common prefix `folder//` as `folder` itself, and `folder/./` and
    `folder/../` as `.` and `..`; none of their keys can be opened by path.

    >>> _odd("lake/a", "lake/a"), _odd("lake/a", "lake/a/.."), _odd("lake/a", "lake/a/b.jsonl")
    ('lake/a//', 'lake/a/../', None)
    """
    name = path[len(folder) + 1 :] if path.startswith(folder + "/") else ""
    if not name:
        return folder + "//"
    if name in (".", "..") or "/" in name:
        return f"{path}/"
    return None


def explain(exc: BaseException, storage: StorageOptions) -> str:
    """An object store error in a sentence that says what to check, never the SDK's dump."""
    return _network(exc, storage) or _short(exc)


def _network(exc: BaseException, storage: StorageOptions) -> str | None:
    """The sentence for a timeout or a failed connection (curl's codes 28, and 6 and 7), else None."""
    text = str(exc)
    where = storage.shown()
    if "curlCode: 28" in text or "Timeout was reached" in text:
        return (
            f"no answer from {where} within {storage.request_timeout:g} s ({storage.retries} attempts); "
            "check that the endpoint is an S3 server and reachable (--endpoint-url, network, proxy), "
            "or raise --request-timeout"
        )
    if "curlCode: 7" in text or "Could not connect" in text or "curlCode: 6" in text:
        return (
            f"cannot connect to {where} ({storage.retries} attempts within --connect-timeout "
            f"{storage.connect_timeout:g} s); check --endpoint-url and that the server is running"
        )
    return None


def _plain(exc: OSError, storage: StorageOptions) -> OSError:
    """A timeout or connection failure as an OSError whose text says what to check; others as they are."""
    said = _network(exc, storage)
    return OSError(said) if said else exc


class _ObjectRaw(CountingRaw):
    """An object's byte stream whose network failures read as explain() sentences."""

    def __init__(self, inner: Any, storage: StorageOptions) -> None:
        super().__init__(inner)
        self._storage = storage

    def _read(self, n: int) -> bytes:
        try:
            return self._inner.read(n)
        except OSError as exc:
            raise _plain(exc, self._storage) from exc


def _mtime(info: Any) -> int:
    return int(info.mtime_ns or 0) if info.mtime_ns is not None else 0


def _short(exc: BaseException) -> str:
    text = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
    return text[:300]


# -- opening, at one version --------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class ObjectVersion:
    """What the HEAD request made when an object is opened says about it."""

    etag: str | None
    size: int | None
    modified_s: int | None  # Last-Modified, whole seconds since the epoch

    @staticmethod
    def of(opened: Any) -> ObjectVersion:
        """From a pyarrow S3 input file or stream (its metadata() is the HEAD response).

        >>> ObjectVersion.of(type("F", (), {"metadata": lambda self: {b"ETag": b'"9b2c"', b"Content-Length": b"12",
        ...     b"Last-Modified": b"2026-11-30T08:00:00Z"}})())
        ObjectVersion(etag='"9b2c"', size=12, modified_s=1796025600)
        """
        try:
            meta = {
                (k.decode() if isinstance(k, bytes) else k).lower(): (v.decode() if isinstance(v, bytes) else v)
                for k, v in opened.metadata().items()
            }
        except Exception:  # a stream without metadata: nothing to pin
            return ObjectVersion(None, None, None)
        size = meta.get("content-length")
        return ObjectVersion(
            meta.get("etag"), int(size) if size and size.isdigit() else None, _epoch_s(meta.get("last-modified"))
        )


def _epoch_s(text: str | None) -> int | None:
    from datetime import datetime

    if not text:
        return None
    try:
        return int(datetime.fromisoformat(text.replace("Z", "+00:00")).timestamp())
    except ValueError:
        return None


def open_random(path: str) -> Any:
    """A random-access pyarrow file for a locator: Parquet reads its footer with ranged GETs."""
    bucket, key, storage = parse_locator(path)
    try:
        return filesystem(storage).open_input_file(f"{bucket}/{key}")
    except OSError as exc:
        raise _plain(exc, storage) from exc


def open_random_pinned(path: str) -> tuple[Any, ObjectVersion]:
    """open_random, and the version it opened (for object_changed after the read)."""
    source = open_random(path)
    return source, ObjectVersion.of(source)


def open_binary(path: str) -> BinaryIO:
    """A sequential byte stream for a locator (JSON, CSV, compressed files)."""
    return _open_binary(path)[0]


def _open_binary(path: str) -> tuple[BinaryIO, ObjectVersion]:
    bucket, key, storage = parse_locator(path)
    try:
        stream = filesystem(storage).open_input_stream(f"{bucket}/{key}", compression=None)
    except OSError as exc:
        raise _plain(exc, storage) from exc
    version = ObjectVersion.of(stream)
    return io.BufferedReader(_ObjectRaw(stream, storage), buffer_size=1 << 20), version


def open_stream_remote(
    path: str,
    compression: str | None,
    *,
    limit: int | None,
    ratio: float | None = None,
    notes: list[IgnoredTail] | None = None,
) -> BinaryIO:
    """formats.open_stream for a locator: decompressed bytes, bounded by limit and ratio.

    The decoders are the local ones (formats.wrap_stream): every byte decoded before a cut
    is handed out, a truncated gzip/zstd/xz is reported, a bomb stops at the limits.
    """
    raw = open_binary(path)
    return wrap_stream(raw, compression, limit=limit, ratio=ratio, notes=notes, taken=lambda: raw.raw.count)  # type: ignore[attr-defined]


def open_stream_pinned(
    path: str, compression: str | None, *, limit: int | None, ratio: float | None = None
) -> tuple[BinaryIO, ObjectVersion]:
    """open_stream_remote, and the version it opened (for object_changed after the read)."""
    raw, version = _open_binary(path)
    stream = wrap_stream(raw, compression, limit=limit, ratio=ratio, taken=lambda: raw.raw.count)  # type: ignore[attr-defined]
    return stream, version


def object_changed(path: str, listed_size: int, listed_mtime_ns: int, opened: ObjectVersion) -> str | None:
    """How the object differs from what the listing and the open saw, or None.

    pyarrow.fs reads an object with one ranged GET per buffer and cannot send If-Match, so
    the version is checked after the read instead: a HEAD whose ETag must equal the one
    seen at open. An object replaced between two GETs gives rows of two versions; this is
    where that is found.
    """
    if opened.size is not None and opened.size != listed_size:
        return f"the object changed after it was listed (size {listed_size:,} then {opened.size:,} bytes); rescan it"
    if opened.modified_s is not None and listed_mtime_ns and opened.modified_s != listed_mtime_ns // 10**9:
        return "the object was replaced after it was listed (a new Last-Modified); rescan it"
    if opened.etag is None:
        return None
    bucket, key, storage = parse_locator(path)
    try:
        now = ObjectVersion.of(filesystem(storage).open_input_file(f"{bucket}/{key}"))
    except FileNotFoundError:
        return "the object was removed while the scan read it"
    except OSError as exc:
        return f"the object's version could not be confirmed after the read ({explain(exc, storage)}); rescan it"
    if now.etag != opened.etag:
        return (
            f"the object was replaced during the read (ETag {opened.etag} when opened, {now.etag} after); "
            "its rows may mix two versions; rescan it"
        )
    return None
