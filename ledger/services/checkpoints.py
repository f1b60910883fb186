"""Signed checkpoints: a statement of every chain head, with a Merkle root, signed with Ed25519.

A checkpoint says "on this day every chain ended here". Given to someone outside the ledger
(an auditor, a second site, a printed page), it turns the chains into proof against a person
who can write to the database: an event removed from the end of a chain, a chain recomputed,
or a row slipped in before the checkpoint all leave the checkpoint's head missing or moved.

Statement (canonical JSON: sorted keys, separators "," and ":", UTF-8, no ASCII escaping;
these exact bytes are signed):

    {"format": "refledger-checkpoint-1", "made_at": ISO 8601 UTC,
     "chains":  {"SITE/TAG": {"head": hex, "length": events}, ...},
     "records": {"head": hex, "length": record versions},
     "merkle_root": hex, "key_id": hex}

Merkle root (the construction of RFC 6962 section 2.1, with SHA-256): the leaves are the lines
``"<name> <length> <head>"`` of every chain ("records" for the record chain), sorted;
leaf hash = SHA-256(0x00 || line), node hash = SHA-256(0x01 || left || right), a list of n > 1
leaves split at the largest power of two below n; the root of no leaves is SHA-256 of nothing.
The root is one short figure that stands for every head (and lets a single chain's head be
proven against it with a path of log2(n) hashes).

Key id: the first 16 hex digits of SHA-256 over the raw 32-byte public key. The private key is
a PEM file (PKCS #8) outside the database, readable by its owner only; the public key is
written beside it as ``PATH.pub`` (PEM) for auditors.
"""

from __future__ import annotations

import hashlib
import json
import os
import stat
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

from ledger.errors import InputError, LedgerError, NotFound
from ledger.store.db import Database

FORMAT = "refledger-checkpoint-1"


# ---- Merkle tree (RFC 6962 section 2.1 shape, SHA-256) -------------------------------------------


def leaf_hash(line: str) -> bytes:
    """SHA-256(0x00 || line): the hash of one leaf."""
    return hashlib.sha256(b"\x00" + line.encode()).digest()


def node_hash(left: bytes, right: bytes) -> bytes:
    """SHA-256(0x01 || left || right): the hash of an inner node."""
    return hashlib.sha256(b"\x01" + left + right).digest()


def merkle_root(lines: Sequence[str]) -> str:
    """The Merkle tree hash of these leaves, in the order given (hex)."""

    def mth(leaves: Sequence[str]) -> bytes:
        if not leaves:
            return hashlib.sha256(b"").digest()
        if len(leaves) == 1:
            return leaf_hash(leaves[0])
        k = 1
        while k * 2 < len(leaves):
            k *= 2
        return node_hash(mth(leaves[:k]), mth(leaves[k:]))

    return mth(list(lines)).hex()


def leaves(statement: Mapping[str, Any]) -> list[str]:
    """The sorted leaf lines of a statement: one per event chain and one for the record chain."""
    lines = [f"{name} {c['length']} {c['head']}" for name, c in statement["chains"].items()]
    lines.append(f"records {statement['records']['length']} {statement['records']['head']}")
    return sorted(lines)


def canonical(statement: Mapping[str, Any]) -> bytes:
    """The signed bytes of a statement."""
    return json.dumps(statement, sort_keys=True, separators=(",", ":"), ensure_ascii=False).encode()


# ---- keys -------------------------------------------------------------------------------------


def key_id(public_raw: bytes) -> str:
    """First 16 hex digits of SHA-256 over the raw public key."""
    return hashlib.sha256(public_raw).hexdigest()[:16]


@dataclass(frozen=True, slots=True)
class NewKey:
    """A key pair written by `key new`."""

    private_path: Path
    public_path: Path
    public_hex: str
    key_id: str


def new_key(path: Path) -> NewKey:
    """Write a new Ed25519 private key to ``path`` (mode 0600, never over an existing file) and
    its public key to ``path.pub``."""
    from cryptography.hazmat.primitives import serialization
    from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey

    public_path = path.with_name(path.name + ".pub")
    for p in (path, public_path):
        if p.exists():
            raise InputError("PATH", str(p), "already exists (a key is never overwritten)")
    if not path.parent.is_dir():
        raise InputError("PATH", str(path), "is in a folder that does not exist")
    key = Ed25519PrivateKey.generate()
    pem = key.private_bytes(serialization.Encoding.PEM, serialization.PrivateFormat.PKCS8,
                            serialization.NoEncryption())
    fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
    with os.fdopen(fd, "wb") as f:
        f.write(pem)
    public = key.public_key()
    public_path.write_bytes(public.public_bytes(serialization.Encoding.PEM,
                                                serialization.PublicFormat.SubjectPublicKeyInfo))
    raw = public.public_bytes(serialization.Encoding.Raw, serialization.PublicFormat.Raw)
    return NewKey(path, public_path, raw.hex(), key_id(raw))


def load_private_key(path: Path):
    """The Ed25519 private key in a PEM file that only its owner can read."""
    from cryptography.hazmat.primitives import serialization
    from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey

    if not path.is_file():
        raise InputError("--key", str(path), "is not a file")
    mode = stat.S_IMODE(path.stat().st_mode)
    if mode & 0o077:
        raise InputError("--key", str(path), f"can be read by others (mode {mode:o}); chmod 600 it")
    try:
        key = serialization.load_pem_private_key(path.read_bytes(), password=None)
    except (ValueError, TypeError) as exc:
        raise InputError("--key", str(path), "is not an unencrypted PEM private key") from exc
    if not isinstance(key, Ed25519PrivateKey):
        raise InputError("--key", str(path), "is not an Ed25519 key")
    return key


def load_public_key(path: Path) -> bytes:
    """The raw Ed25519 public key in a PEM file (or a file holding its 64 hex digits)."""
    from cryptography.hazmat.primitives import serialization
    from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PublicKey

    if not path.is_file():
        raise InputError("--public-key", str(path), "is not a file")
    data = path.read_bytes()
    text = data.decode("ascii", "replace").strip()
    if len(text) == 64 and all(c in "0123456789abcdefABCDEF" for c in text):
        return bytes.fromhex(text)
    try:
        key = serialization.load_pem_public_key(data)
    except (ValueError, TypeError) as exc:
        raise InputError("--public-key", str(path), "is not a PEM public key") from exc
    if not isinstance(key, Ed25519PublicKey):
        raise InputError("--public-key", str(path), "is not an Ed25519 key")
    return key.public_bytes(serialization.Encoding.Raw, serialization.PublicFormat.Raw)


def signature_ok(statement_bytes: bytes, signature_hex: str, public_raw: bytes) -> bool:
    """Whether the signature over the statement verifies with this public key."""
    from cryptography.exceptions import InvalidSignature
    from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PublicKey

    try:
        Ed25519PublicKey.from_public_bytes(public_raw).verify(bytes.fromhex(signature_hex), statement_bytes)
    except (InvalidSignature, ValueError):
        return False
    return True


# ---- making and reading checkpoints ---------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class Checkpoint:
    """A checkpoint as stored or read from a file."""

    id: int | None
    statement: dict[str, Any]
    statement_bytes: bytes
    signature: str
    public_key: str  # hex, as stored with it

    @property
    def made_at(self) -> str:
        return str(self.statement["made_at"])

    @property
    def key_id(self) -> str:
        return str(self.statement["key_id"])

    def document(self) -> dict[str, Any]:
        """The file form: the statement, its signature and the public key it was made with."""
        return {"statement": self.statement, "signature": self.signature, "public_key": self.public_key}


def make_checkpoint(db: Database, *, key_path: Path, out: Path | None = None) -> Checkpoint:
    """Verify every chain, then sign and store a statement of their heads (and write it to ``out``).

    Raises:
        LedgerError: the chains do not verify (a checkpoint never vouches for a broken ledger).
    """
    from cryptography.hazmat.primitives import serialization
    from sqlalchemy import insert

    from ledger.services.integrity import verify
    from ledger.store.results import inserted_id
    from ledger.store.tables import checkpoint

    key = load_private_key(key_path)
    if out is not None and out.exists():
        raise InputError("--out", str(out), "already exists")
    checked = verify(db, kept=False)
    if not checked.ok:
        raise LedgerError(f"checkpoint: the ledger does not verify ({checked.problems()[0]}); "
                          "run `refledger verify` and investigate before signing")
    raw = key.public_key().public_bytes(serialization.Encoding.Raw, serialization.PublicFormat.Raw)
    made_at = datetime.now(UTC)
    statement: dict[str, Any] = {
        "format": FORMAT,
        "made_at": made_at.isoformat(timespec="microseconds"),
        "chains": {name: {"head": head, "length": checked.lengths[name]} for name, head in checked.heads.items()},
        "records": {"head": checked.records_head, "length": checked.record_versions},
        "key_id": key_id(raw),
    }
    statement["merkle_root"] = merkle_root(leaves(statement))
    body = canonical(statement)
    signature = key.sign(body).hex()
    with db.write() as conn:
        new_id = inserted_id(conn, insert(checkpoint).values(
            made_at=made_at, statement=body.decode(), signature=signature, key_id=statement["key_id"],
            public_key=raw.hex()))
    made = Checkpoint(new_id, statement, body, signature, raw.hex())
    if out is not None:
        out.write_text(json.dumps(made.document(), indent=2, sort_keys=True, ensure_ascii=False) + "\n",
                       encoding="utf-8")
    return made


def _from_row(row: Any) -> Checkpoint:
    body = row.statement.encode()
    return Checkpoint(row.id, json.loads(body), body, row.signature, row.public_key)


def load_checkpoint(db: Database, ref: str) -> Checkpoint:
    """A checkpoint by its id in the ledger, or from a file written by `checkpoint --out`."""
    from sqlalchemy import select

    from ledger.store.tables import checkpoint

    if ref.isdigit():
        with db.read() as conn:
            row = conn.execute(select(checkpoint).where(checkpoint.c.id == int(ref))).first()
        if row is None:
            raise NotFound(f"--checkpoint: {ref} is not a checkpoint in the ledger (and not a file)")
        return _from_row(row)
    path = Path(ref)
    if not path.is_file():
        raise InputError("--checkpoint", ref, "is neither a checkpoint id nor a file")
    try:
        doc = json.loads(path.read_text(encoding="utf-8"))
        statement = doc["statement"]
        found = Checkpoint(None, statement, canonical(statement), str(doc["signature"]), str(doc["public_key"]))
        if statement.get("format") != FORMAT:
            raise ValueError(statement.get("format"))
    except (OSError, ValueError, KeyError, TypeError, AttributeError) as exc:
        raise InputError("--checkpoint", ref, "is not a checkpoint file written by `refledger checkpoint`") from exc
    return found


def newest_checkpoint(db: Database) -> Checkpoint | None:
    """The newest checkpoint stored in the ledger, if any."""
    from sqlalchemy import select

    from ledger.store.tables import checkpoint

    with db.read() as conn:
        row = conn.execute(select(checkpoint).order_by(checkpoint.c.id.desc()).limit(1)).first()
    return _from_row(row) if row is not None else None


@dataclass(frozen=True, slots=True)
class SignatureCheck:
    """Whether a checkpoint is what its signer signed, and against which key that was checked."""

    ok: bool
    key_source: str  # "--public-key" or "the key stored with the checkpoint"
    problems: tuple[str, ...]


def check_signature(found: Checkpoint, public_raw: bytes | None = None) -> SignatureCheck:
    """Check a checkpoint's signature, its key id and its Merkle root.

    Args:
        public_raw: the auditor's copy of the public key; None checks against the key stored
            with the checkpoint, which only shows the statement was not altered after signing
            (someone with write access could sign a false statement with a key of their own).
    """
    problems: list[str] = []
    source = "--public-key" if public_raw is not None else "the key stored with the checkpoint"
    try:
        key = public_raw if public_raw is not None else bytes.fromhex(found.public_key)
    except ValueError:
        key = b""
    if found.statement.get("key_id") != key_id(key):
        problems.append(f"it was signed with key {found.statement.get('key_id')}, not with key {key_id(key)}")
    if not signature_ok(found.statement_bytes, found.signature, key):
        problems.append("its signature does not verify: the statement was altered or signed with another key")
    try:
        root_ok = merkle_root(leaves(found.statement)) == found.statement.get("merkle_root")
    except (KeyError, TypeError, AttributeError):
        root_ok = False
    if not root_ok:
        problems.append("its Merkle root does not match its chain heads")
    return SignatureCheck(not problems, source, tuple(problems))
