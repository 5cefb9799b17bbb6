"""How example values appear in outputs: shown, hidden or replaced by a keyed hash.

An option value, decided once at the edge (flag, config [output] table, or keyword) and applied
to a Profile by results/conceal.py before any output is made.
"""

from __future__ import annotations

import hashlib
import hmac
import os
import re
from dataclasses import dataclass
from pathlib import Path

from driftline.errors import OptionError

MODES = ("show", "hide", "hash")


KEY_ENV = "DRIFTLINE_HASH_KEY"  # the key for hash mode, when no key file is given


HASH_HEX = 16  # 64 bits of the HMAC: collisions are negligible among the values of a report


_QUOTED_MESSAGE = re.compile(
    r"^(cannot parse|parsing stopped|unexpected \w+|read failed): (.*?)"
    r"(; please report this file)?$",
    re.S,
)


@dataclass(frozen=True, slots=True)
class ValuePolicy:
    """How example values appear in outputs: mode 'show', 'hide' or 'hash' (with its key)."""

    mode: str = "show"
    key: bytes | None = None

    def __post_init__(self) -> None:
        if self.mode not in MODES:
            raise OptionError(f"example_values must be one of {', '.join(MODES)}, got {self.mode!r}")
        if self.mode == "hash" and not self.key:
            raise OptionError(f"example_values 'hash' needs a key: give --hash-key-file FILE or set {KEY_ENV}")

    def text(self, value: str) -> str:
        """One example value as the outputs show it."""
        if self.mode == "show":
            return value
        if self.mode == "hide" or not value:
            return ""
        assert self.key is not None
        return (
            "hmac:" + hmac.new(self.key, value.encode("utf-8", "surrogatepass"), hashlib.sha256).hexdigest()[:HASH_HEX]
        )

    def message(self, message: str) -> str:
        """A file problem's message without the data a parser quoted in it."""
        m = _QUOTED_MESSAGE.match(message)
        if self.mode == "show" or m is None:
            return message
        quoted = self.text(m.group(2)) or "(value hidden)"
        return f"{m.group(1)}: {quoted}{m.group(3) or ''}"


def value_policy(
    mode: str | None,
    key: bytes | str | None = None,
    key_file: str | os.PathLike[str] | None = None,
) -> ValuePolicy:
    """The policy for mode ('show' when None); the key comes from key, key_file or DRIFTLINE_HASH_KEY."""
    mode = mode or "show"
    if mode == "hash" and key is None:
        if key_file is not None:
            try:
                key = Path(key_file).read_bytes().strip()
            except OSError as exc:
                raise OptionError(f"cannot read the hash key file {os.fspath(key_file)!r}: {exc.strerror}") from None
        else:
            key = os.environ.get(KEY_ENV)
    raw = key.encode() if isinstance(key, str) else key
    return ValuePolicy(mode, raw if mode == "hash" else None)


OUTPUT_KEYS = ("example_values", "hash_key_file")


def output_values(config: object) -> ValuePolicy | None:
    """The [output] table of a TOML configuration file (a policy file, a recommend config), or
    None when config is not a path or has no such table.  Keys: example_values = "show" |
    "hide" | "hash", and hash_key_file (relative to the file's folder) for hash.

    >>> import tempfile, pathlib
    >>> f = pathlib.Path(tempfile.mkdtemp()) / "gate.toml"; _ = f.write_text('[output]\\nexample_values = "hide"\\n')
    >>> output_values(f).mode
    'hide'
    """
    if not isinstance(config, str | os.PathLike):
        return None
    import tomllib

    try:
        doc = tomllib.loads(Path(config).read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError):
        return None  # the file's own loader reports what is wrong with it
    table = doc.get("output")
    if table is None:
        return None
    return values_from_table(table, os.path.dirname(os.fspath(config)), f"{os.fspath(config)!r} [output]")


def values_from_table(table: object, folder: str, where: str) -> ValuePolicy:
    """The policy an [output] table sets (hash_key_file relative to folder); where names it in errors."""
    if not isinstance(table, dict) or set(table) - set(OUTPUT_KEYS):
        unknown = sorted(set(table) - set(OUTPUT_KEYS)) if isinstance(table, dict) else ["(not a table)"]
        raise OptionError(f"{where}: unknown key {unknown[0]!r}; allowed keys: {', '.join(OUTPUT_KEYS)}")
    mode, key_file = table.get("example_values"), table.get("hash_key_file")
    if mode is not None and not isinstance(mode, str) or key_file is not None and not isinstance(key_file, str):
        raise OptionError(f"{where}: example_values and hash_key_file are strings")
    if key_file is not None:
        key_file = os.path.join(folder, key_file)
    try:
        return value_policy(mode, key_file=key_file)
    except OptionError as exc:
        raise OptionError(f"{where}: {exc}") from None
