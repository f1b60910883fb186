"""Checkpoint signatures and the Merkle root, checked against outside definitions.

* Ed25519: RFC 8032 section 7.1, TEST 1 (secret key, public key, empty message, signature).
  Hex as printed in the RFC, read from two independent copies of the vector: SerenityOS
  Tests/LibCrypto/TestEd25519.cpp ("https://datatracker.ietf.org/doc/html/rfc8032#section-7.1
  TEST_CASE(TEST_1)") and cryptonite tests/KAT_Ed25519.hs (first vector); both agree.
* Signatures made by our code are verified with the `cryptography` package's own
  Ed25519PublicKey.verify, not with our wrapper.
* Merkle tree: the shape of RFC 6962 section 2.1 (leaf = H(0x00 || d), node = H(0x01 || l || r),
  split at the largest power of two smaller than n), from memory (the RFC text was not read
  here), computed with hashlib by hand.
"""

from __future__ import annotations

import hashlib
import json
import stat
from pathlib import Path

import pytest
from cryptography.hazmat.primitives import serialization
from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey, Ed25519PublicKey

from ledger.errors import InputError
from ledger.services import checkpoints as cp

# RFC 8032 section 7.1, TEST 1 (sources in the module docstring)
RFC8032_SECRET = "9d61b19deffd5a60ba844af492ec2cc44449c5697b326919703bac031cae7f60"
RFC8032_PUBLIC = "d75a980182b10ab7d54bfed3c964073a0ee172f3daa62325af021a68f707511a"
RFC8032_SIGNATURE = (
    "e5564300c360ac729086e2cc806e828a84877f1eb8e5d974d873e06522490155"
    "5fb8821590a33bacc61e39701cf9b46bd25bf5f0595bbe24655141438e7a100b"
)


def test_rfc8032_test_1_vector_through_our_signature_check() -> None:
    key = Ed25519PrivateKey.from_private_bytes(bytes.fromhex(RFC8032_SECRET))
    raw = key.public_key().public_bytes(serialization.Encoding.Raw, serialization.PublicFormat.Raw)
    assert raw.hex() == RFC8032_PUBLIC
    assert key.sign(b"").hex() == RFC8032_SIGNATURE  # Ed25519 is deterministic
    assert cp.signature_ok(b"", RFC8032_SIGNATURE, bytes.fromhex(RFC8032_PUBLIC))
    assert not cp.signature_ok(b"x", RFC8032_SIGNATURE, bytes.fromhex(RFC8032_PUBLIC))


def test_merkle_root_follows_rfc6962_shape() -> None:
    def h(b: bytes) -> bytes:
        return hashlib.sha256(b).digest()

    a, b, c = (h(b"\x00" + s.encode()) for s in ("a", "b", "c"))
    assert cp.merkle_root([]) == h(b"").hex()
    assert cp.merkle_root(["a"]) == a.hex()
    assert cp.merkle_root(["a", "b"]) == h(b"\x01" + a + b).hex()
    assert cp.merkle_root(["a", "b", "c"]) == h(b"\x01" + h(b"\x01" + a + b) + c).hex()  # split at 2


def test_new_key_file_is_private_and_never_overwritten(tmp_path: Path) -> None:
    made = cp.new_key(tmp_path / "site.key")
    assert stat.S_IMODE(made.private_path.stat().st_mode) == 0o600
    assert made.key_id == hashlib.sha256(bytes.fromhex(made.public_hex)).hexdigest()[:16]
    assert cp.load_public_key(made.public_path).hex() == made.public_hex
    with pytest.raises(InputError, match="already exists"):
        cp.new_key(tmp_path / "site.key")
    made.private_path.chmod(0o644)
    with pytest.raises(InputError, match="chmod 600"):
        cp.load_private_key(made.private_path)


def test_stored_checkpoint_verifies_with_cryptography_itself(db, tmp_path: Path) -> None:  # type: ignore[no-untyped-def]
    from ledger.services.recording import add_site

    add_site(db, code="S", name="S", country="DE")
    key = cp.new_key(tmp_path / "k")
    made = cp.make_checkpoint(db, key_path=key.private_path, out=tmp_path / "cp.json")
    doc = json.loads((tmp_path / "cp.json").read_text())
    public = serialization.load_pem_public_key(key.public_path.read_bytes())
    assert isinstance(public, Ed25519PublicKey)
    signed = json.dumps(doc["statement"], sort_keys=True, separators=(",", ":"), ensure_ascii=False).encode()
    public.verify(bytes.fromhex(doc["signature"]), signed)  # raises InvalidSignature if wrong
    stored = cp.load_checkpoint(db, str(made.id))
    assert stored.statement_bytes == signed and stored.signature == doc["signature"]
    assert stored.statement["records"]["length"] == 1  # the site's first version
    assert stored.statement["merkle_root"] == cp.merkle_root(cp.leaves(stored.statement))


def test_an_altered_checkpoint_file_fails(db, tmp_path: Path) -> None:  # type: ignore[no-untyped-def]
    key = cp.new_key(tmp_path / "k")
    cp.make_checkpoint(db, key_path=key.private_path, out=tmp_path / "cp.json")
    doc = json.loads((tmp_path / "cp.json").read_text())
    doc["statement"]["made_at"] = "2020-01-01T00:00:00.000000+00:00"
    (tmp_path / "cp.json").write_text(json.dumps(doc))
    found = cp.load_checkpoint(db, str(tmp_path / "cp.json"))
    check = cp.check_signature(found, cp.load_public_key(key.public_path))
    assert not check.ok and "does not verify" in check.problems[0]


def test_a_checkpoint_still_holds_after_a_move_to_another_database(db, tmp_path: Path) -> None:  # type: ignore[no-untyped-def]
    from datetime import date

    from ledger.services.backup import export_ledger, restore_ledger
    from ledger.services.integrity import verify
    from ledger.services.recording import add_site, add_system
    from ledger.store.db import Database, locate
    from ledger.units import parse_mass_ng

    add_site(db, code="S", name="S", country="DE")
    add_system(db, site_code="S", tag="A", refrigerant="R-134a", charge_ng=parse_mass_ng("5 kg"),
               application="other", in_service_on=date(2024, 1, 1))
    key = cp.new_key(tmp_path / "k")
    cp.make_checkpoint(db, key_path=key.private_path, out=tmp_path / "cp.json")
    export_ledger(db, tmp_path / "move")
    target = locate(str(tmp_path / "moved.db"))
    restore_ledger(tmp_path / "move", target)
    moved = Database(target)
    found = cp.load_checkpoint(moved, "1")
    assert cp.check_signature(found, cp.load_public_key(key.public_path)).ok
    result = verify(moved, checkpoint=found.statement)
    assert result.ok, result.problems()
    moved.close()
