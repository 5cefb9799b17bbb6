"""Text encoding names as Python's codecs know them: checked once, where an option names one."""

from __future__ import annotations

import codecs

UTF8 = "utf-8"


def codec_name(name: str) -> str:
    """The canonical name of a text encoding Python's codecs know; ValueError otherwise.

    >>> codec_name("Latin-1"), codec_name("UTF8"), codec_name("utf_16")
    ('iso8859-1', 'utf-8', 'utf-16')
    >>> codec_name("base64")
    Traceback (most recent call last):
    ValueError: 'base64' is not a text encoding Python's codecs know (e.g. utf-8, utf-16, latin-1, cp1252)
    """
    try:
        found = codecs.lookup(name).name
        b"a".decode(name)  # LookupError for bytes-to-bytes codecs (base64, rot13...)
    except UnicodeDecodeError:  # a text encoding that cannot decode this byte alone (utf-16)
        pass
    except (LookupError, TypeError, ValueError):
        raise ValueError(
            f"{name!r} is not a text encoding Python's codecs know (e.g. utf-8, utf-16, latin-1, cp1252)"
        ) from None
    return UTF8 if found == "utf-8-sig" else found  # a UTF-8 mark is the readers' to report
