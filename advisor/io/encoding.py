"""Text encodings of the files the advisor reads: UTF-8, with or without a byte-order mark.

    sniff_encoding_problem(head)      # None, "UTF-16", "UTF-32" or "binary"
    decode_text(raw, SiteError, "site file", "site.yaml")
    repeated_csv_column(header_line)  # a column named twice, or None

A spreadsheet's UTF-8 byte-order mark is accepted everywhere.  UTF-16 and UTF-32 text (by its
byte-order mark, or by the NUL byte every other ASCII character carries without one) is named
as such, with the fix ("re-save it as UTF-8"), rather than called binary.
"""

from __future__ import annotations

import codecs
import csv

from advisor.errors import AdvisorError

_BOMS = (
    (codecs.BOM_UTF32_LE, "UTF-32"),
    (codecs.BOM_UTF32_BE, "UTF-32"),
    (codecs.BOM_UTF16_LE, "UTF-16"),
    (codecs.BOM_UTF16_BE, "UTF-16"),
)


def sniff_encoding_problem(head: bytes) -> str | None:
    """What is wrong with the first bytes of a file that should be UTF-8 text, or ``None``.

    Recognises UTF-16/UTF-32 (by their byte-order mark, or by the NUL bytes every other ASCII
    character carries without one) and binary content (other NUL bytes).  A UTF-8 BOM is fine.
    """
    if head.startswith(codecs.BOM_UTF8):
        head = head[len(codecs.BOM_UTF8) :]
    for bom, name in _BOMS:
        if head.startswith(bom):
            return name
    sample = head[:4096]
    if b"\x00" not in sample:
        return None
    if len(sample) >= 4:
        even, odd = sample[0::2], sample[1::2]
        n = min(len(even), len(odd))
        # ASCII text in UTF-16: one of the two byte lanes is (almost) all NUL, the other is not.
        if odd[:n].count(0) >= 0.9 * n and even[:n].count(0) <= 0.1 * n:
            return "UTF-16"
        if even[:n].count(0) >= 0.9 * n and odd[:n].count(0) <= 0.1 * n:
            return "UTF-16"
    return "binary"


def encoding_error(
    problem: str, error_type: type[AdvisorError], what: str, source: str, expected: str = "text"
) -> AdvisorError:
    """The one-line error for a :func:`sniff_encoding_problem` finding."""
    if problem in ("UTF-16", "UTF-32"):
        return error_type(
            f"{what} is {problem} text, not UTF-8",
            source=source,
            hint="re-save it as UTF-8 (in a spreadsheet: 'CSV UTF-8'; in an editor: encoding UTF-8)",
        )
    return error_type("binary content (NUL bytes)", source=source, hint=f"expected {expected}")


def decode_text(raw: bytes, error_type: type[AdvisorError], what: str, source: str, expected: str = "text") -> str:
    """UTF-8 bytes as text (a leading BOM dropped); a clear error naming the line otherwise."""
    problem = sniff_encoding_problem(raw[:4096])
    if problem is None and b"\x00" in raw:
        problem = "binary"
    if problem is not None:
        raise encoding_error(problem, error_type, what, source, expected)
    if raw.startswith(codecs.BOM_UTF8):
        raw = raw[len(codecs.BOM_UTF8) :]
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = raw.count(b"\n", 0, exc.start) + 1
        raise error_type(
            f"not UTF-8 text (byte 0x{raw[exc.start]:02x})", source=source, line=line, hint="re-save the file as UTF-8"
        ) from None


def repeated_csv_column(header: bytes | str) -> str | None:
    """The first column name given twice in a CSV header line (BOM and spaces ignored), or ``None``.

    pandas would rename the second to ``name.1`` and silently read the first: a duplicated
    column is refused instead, like a duplicated key anywhere else.
    """
    text = header.decode("utf-8", "replace") if isinstance(header, bytes) else header
    names = [n.strip() for n in next(csv.reader([text.lstrip("\ufeff").rstrip("\r\n")]), [])]
    seen: set[str] = set()
    for name in names:
        if name and name in seen:
            return name
        seen.add(name)
    return None
