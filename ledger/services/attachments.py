"""The attachment store: photos and service-report files kept by their SHA-256.

A file is stored as ``<root>/<sha256>`` (64 hex digits, nothing from the request in the path)
and the digest goes into the event, so the logbook can prove which document it was. Only a
few file types are taken, recognised by their first bytes, not by the name the browser sends.
"""

from __future__ import annotations

import hashlib
import os
import re
import tempfile
from pathlib import Path

from ledger.errors import InputError

MAX_ATTACHMENT_BYTES = 10 * 1024 * 1024  # a phone photo or a scanned report fits easily
# (media type, first bytes) of what may be attached: JPEG, PNG, WebP (photos) and PDF (reports).
SIGNATURES: tuple[tuple[str, bytes], ...] = (
    ("image/jpeg", b"\xff\xd8\xff"),
    ("image/png", b"\x89PNG\r\n\x1a\n"),
    ("application/pdf", b"%PDF-"),
    ("image/webp", b"RIFF"),
)
DIGEST = re.compile(r"^[0-9a-f]{64}$")


def media_type(data: bytes) -> str | None:
    """The media type of an acceptable attachment, from its first bytes; None if not one."""
    for kind, magic in SIGNATURES:
        if data.startswith(magic) and (kind != "image/webp" or data[8:12] == b"WEBP"):
            return kind
    return None


def store(root: Path, data: bytes, *, name: str = "file") -> str:
    """Keep one attached file; returns its SHA-256 (hex).

    Raises:
        InputError: empty, too large, or not a JPEG, PNG, WebP or PDF file.
    """
    if not data:
        raise InputError("attachment", name, "is empty")
    if len(data) > MAX_ATTACHMENT_BYTES:
        raise InputError("attachment", name, f"is larger than {MAX_ATTACHMENT_BYTES // (1024 * 1024)} MB")
    if media_type(data) is None:
        raise InputError("attachment", name, "is not a JPEG, PNG, WebP or PDF file")
    digest = hashlib.sha256(data).hexdigest()
    root.mkdir(parents=True, exist_ok=True)
    target = root / digest
    if not target.exists():
        fd, tmp = tempfile.mkstemp(dir=root, prefix=".incoming-")
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
        os.replace(tmp, target)
    return digest


def path_of(root: Path, digest: str) -> Path | None:
    """The stored file for a digest, or None (a malformed digest never reaches the file system)."""
    if not DIGEST.match(digest):
        return None
    target = root / digest
    return target if target.is_file() else None
