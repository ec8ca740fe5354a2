"""Bytes to text: which encoding a file is in, and a line-by-line text stream of it.

UTF-8 (with or without BOM), UTF-16 (with a BOM, or without one when every other byte of ASCII
text is NUL) and Latin-1 (when the start of the file is not UTF-8). A UTF-16 file cut in the
middle of a character (an odd number of bytes, half a surrogate pair) decodes to U+FFFD there;
the half-written last line is then left out by the table readers. Binary files are refused.
"""

from __future__ import annotations

import codecs
import io
import re
from pathlib import Path

from ..errors import InputError

HEAD_BYTES = 1 << 20          # bytes read to decide the encoding
REPLACEMENT = "\ufffd"
_CONTROL = re.compile("[\x00-\x08\x0b\x0e-\x1f\ufffd]")


def _latin1_fallback(exc: UnicodeDecodeError) -> tuple[str, int]:
    """Decode a byte that is not UTF-8 as its Latin-1 character (a stray byte in UTF-8 text)."""
    return exc.object[exc.start:exc.end].decode("latin-1"), exc.end


codecs.register_error("rateabs-latin1", _latin1_fallback)

BINARY = ("the file is binary, not a text or .xlsx export", "export the data as CSV, TSV or .xlsx")


def sniff_encoding(head: bytes, complete: bool) -> str:
    """The encoding of a file from its first bytes (``complete``: the head is the whole file).

    Refuses binary data with an :class:`InputError`.
    """
    if head.startswith(codecs.BOM_UTF8):
        enc = "utf-8-sig"
    elif head.startswith((codecs.BOM_UTF16_LE, codecs.BOM_UTF16_BE)):
        enc = "utf-16"
    elif len(head) >= 4 and head.count(b"\x00") > len(head) // 4:
        # UTF-16 without a BOM: every other byte is NUL for ASCII text
        enc = "utf-16-le" if head[1::2].count(b"\x00") > head[0::2].count(b"\x00") else "utf-16-be"
    else:
        try:
            codecs.getincrementaldecoder("utf-8")().decode(head, final=complete)
            enc = "utf-8"
        except UnicodeDecodeError:
            enc = "latin-1"
    text = codecs.getincrementaldecoder(enc)(errors="replace").decode(head, final=complete)
    if not looks_textual(text):
        raise InputError(*BINARY)
    return enc


def looks_textual(text: str) -> bool:
    """True unless control characters or undecodable bytes abound (a binary file)."""
    sample = text[:20000]
    return len(_CONTROL.findall(sample)) <= max(2, len(sample) // 200)


def open_text(path: str | Path, encoding: str) -> io.TextIOWrapper:
    """The file as a text stream with universal line ends; undecodable bytes never raise."""
    errors = "rateabs-latin1" if encoding == "utf-8" else "replace"
    return io.TextIOWrapper(open(path, "rb"), encoding=encoding, errors=errors, newline=None)


def ends_with_line_end(path: str | Path, encoding: str, size: int) -> bool:
    """True when the file's last character is a line end (an unfinished write has none)."""
    if size == 0:
        return True
    with open(path, "rb") as fh:
        first = fh.read(2)
        fh.seek(max(0, size - 2))
        tail = fh.read()
    if not encoding.startswith("utf-16"):
        return tail[-1:] in (b"\n", b"\r")
    if size % 2:
        return False            # cut in the middle of a character
    big = encoding == "utf-16-be" or (encoding == "utf-16" and first == codecs.BOM_UTF16_BE)
    return tail in ((b"\x00\n", b"\x00\r") if big else (b"\n\x00", b"\r\x00"))
