"""Sign calculator documents with Ed25519 and check their signatures.

The signature (RFC 8032 Ed25519, via ``cryptography``) is made over the RFC 8785
canonical bytes of the payload, i.e. the document without its ``signature``
section (see :mod:`calcbuilder.calc.canonical` and FORMAT.md). Checking a
document gives one of four :class:`TrustState` values; only ``TAMPERED``
forbids computing, the others are shown to the user as they are.

The ``signed_at`` time is not covered by the signature (the format signs the
payload only): treat it as the time the signer *states*, not as proof.
"""

from __future__ import annotations

import base64
import binascii
import enum
import hashlib
import re
from dataclasses import dataclass
from datetime import UTC, datetime
from typing import Any

from cryptography.exceptions import InvalidSignature
from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey, Ed25519PublicKey

from ..errors import SignatureError
from .canonical import SIGNATURE_KEY, canonical_bytes, split_signature
from .keys import TrustedKeys, key_fingerprint, raw_public_bytes

__all__ = [
    "ALGORITHM",
    "TrustState",
    "TrustedKeys",  # re-exported for callers of verify_document
    "Verification",
    "sign_document",
    "verify_document",
]

ALGORITHM = "ed25519"
_FIELDS = ("algorithm", "public_key", "key_fingerprint", "signed_at", "value")
_TIME_RE = re.compile(r"\d{4}-\d{2}-\d{2}T\d{2}:\d{2}:\d{2}Z")
_TIME_FORMAT = "%Y-%m-%dT%H:%M:%SZ"


class TrustState(enum.Enum):
    """What a signature check concluded about a calculator file."""

    VERIFIED = "verified"
    """Signature valid, made by a key on the clinic's trusted list."""
    UNKNOWN_SIGNER = "unknown_signer"
    """Signature valid, but the key is not on the trusted list."""
    UNSIGNED = "unsigned"
    """No ``signature`` section."""
    TAMPERED = "tampered"
    """The signature does not verify or is malformed: never compute with this file."""


@dataclass(frozen=True)
class Verification:
    """The result of :func:`verify_document`.

    Attributes
    ----------
    state : TrustState
        The conclusion.
    file_fingerprint : str
        SHA-256 hex of the canonical payload (always present).
    key_fingerprint : str or None
        The signing key's fingerprint as stated in the file (None if unsigned).
    signer : str or None
        The trusted-list label of the signing key (VERIFIED only).
    signed_at : str or None
        The stated signing time (not covered by the signature).
    message : str
        The conclusion in plain words for the user.
    """

    state: TrustState
    file_fingerprint: str
    key_fingerprint: str | None
    signer: str | None
    signed_at: str | None
    message: str

    @property
    def may_compute(self) -> bool:
        """False only for TAMPERED: such a file must never produce a risk."""
        return self.state is not TrustState.TAMPERED

    def require_computable(self, source: str) -> None:
        """Raise :class:`SignatureError` naming ``source`` if the file is TAMPERED."""
        if not self.may_compute:
            raise SignatureError(f"{source}: {self.message}")


def sign_document(document: dict[str, Any], private_key: Ed25519PrivateKey, *,
                  signed_at: datetime | None = None) -> dict[str, Any]:
    """Return a copy of ``document`` with a fresh ``signature`` section.

    Any old signature is dropped; the payload is signed as it is (validating
    it is the caller's job). The new signature is checked before returning.

    Parameters
    ----------
    document : dict
        The calculator document.
    private_key : Ed25519PrivateKey
        The signer's key.
    signed_at : datetime, optional
        A timezone-aware time to state; default now. Stored in UTC to the second.

    Returns
    -------
    dict
        The payload members in their order, then ``signature``.

    Raises
    ------
    SignatureError
        If the key is not an Ed25519 private key.
    CalcFileError
        If the payload has a value RFC 8785 cannot canonicalise.
    """
    if not isinstance(private_key, Ed25519PrivateKey):
        raise SignatureError("signing key: not an Ed25519 private key; calcbuilder signs with "
                             "Ed25519 only")
    payload, _ = split_signature(document)
    data = canonical_bytes(payload)
    value = private_key.sign(data)
    public_key = private_key.public_key()
    public_key.verify(value, data)  # guard against a faulty signing step
    section = {
        "algorithm": ALGORITHM,
        "public_key": base64.b64encode(raw_public_bytes(public_key)).decode("ascii"),
        "key_fingerprint": key_fingerprint(public_key),
        "signed_at": _format_time(signed_at),
        "value": base64.b64encode(value).decode("ascii"),
    }
    return {**payload, SIGNATURE_KEY: section}


def verify_document(document: dict[str, Any], trusted: TrustedKeys | None) -> Verification:
    """Check the signature of a calculator document.

    Parameters
    ----------
    document : dict
        The calculator document as read from its file.
    trusted : TrustedKeys or None
        The clinic's trusted keys; with None no key is trusted, so a valid
        signature gives UNKNOWN_SIGNER. Use ``TrustedKeys()`` for the
        clinic's own list.

    Returns
    -------
    Verification
        Never raises for a bad signature: that is reported as TAMPERED.

    Raises
    ------
    CalcFileError
        If ``document`` is not an object or its payload cannot be canonicalised.
    """
    payload, section = split_signature(document)
    data = canonical_bytes(payload)
    file_fp = _sha256_hex(data)
    if SIGNATURE_KEY not in document:
        return Verification(TrustState.UNSIGNED, file_fp, None, None, None, _UNSIGNED)
    stated_fp = section.get("key_fingerprint") if isinstance(section, dict) else None
    stated_fp = stated_fp if isinstance(stated_fp, str) else None
    try:
        raw_key, value, signed_at = _read_section(section)
        Ed25519PublicKey.from_public_bytes(raw_key).verify(value, data)
    except _BrokenSignatureError as exc:
        return _tampered(file_fp, stated_fp, str(exc))
    except (InvalidSignature, ValueError):
        return _tampered(file_fp, stated_fp, "the signature value does not match the content")
    return _valid(file_fp, key_fingerprint(raw_key), raw_key, signed_at, trusted)


_UNSIGNED = ("Not signed: nothing shows who published this calculator or that it is unchanged. "
             "Use it for testing only, or ask its author for a signed copy.")


class _BrokenSignatureError(Exception):
    """The signature section is malformed (reported as TAMPERED)."""


def _read_section(section: Any) -> tuple[bytes, bytes, str]:
    """Check the signature section's fields; return (raw key, signature, signed_at)."""
    if not isinstance(section, dict):
        raise _BrokenSignatureError("'signature' is not an object")
    extra = sorted(set(section) - set(_FIELDS))
    missing = [name for name in _FIELDS if name not in section]
    if extra or missing:
        parts = ([f"missing {', '.join(missing)}"] if missing else []) + (
            [f"unknown {', '.join(extra)}"] if extra else [])
        raise _BrokenSignatureError(f"signature fields: {'; '.join(parts)}")
    if section["algorithm"] != ALGORITHM:
        raise _BrokenSignatureError(f"signature.algorithm is {section['algorithm']!r}, "
                               f"not {ALGORITHM!r}")
    raw_key = _decode_b64(section["public_key"], 32, "signature.public_key")
    value = _decode_b64(section["value"], 64, "signature.value")
    if section["key_fingerprint"] != key_fingerprint(raw_key):
        raise _BrokenSignatureError("signature.key_fingerprint does not match signature.public_key")
    signed_at = section["signed_at"]
    if not isinstance(signed_at, str) or not _valid_time(signed_at):
        raise _BrokenSignatureError("signature.signed_at is not a time like 2026-12-02T10:00:00Z")
    return raw_key, value, signed_at


def _decode_b64(text: Any, size: int, field: str) -> bytes:
    """Decode canonical standard base64 of exactly ``size`` bytes."""
    try:
        raw = base64.b64decode(text, validate=True) if isinstance(text, str) else b""
    except (binascii.Error, ValueError):
        raw = b""
    if len(raw) != size or base64.b64encode(raw).decode("ascii") != text:
        raise _BrokenSignatureError(f"{field} is not base64 of {size} bytes")
    return raw


def _valid(file_fp: str, key_fp: str, raw_key: bytes, signed_at: str,
           trusted: TrustedKeys | None) -> Verification:
    """The verdict for a signature that verifies: trusted or not."""
    entry = trusted.find(key_fp) if trusted is not None else None
    if entry is not None and entry.public_key == raw_key:
        message = (f"Signed by {entry.name} (key {key_fp[:16]}), a key this clinic trusts; "
                   "the calculator is unchanged since it was signed.")
        return Verification(TrustState.VERIFIED, file_fp, key_fp, entry.name, signed_at, message)
    message = (f"Validly signed, but the signing key {key_fp[:16]} is not on this clinic's "
               "trusted list: the calculator is unchanged since signing, but who signed it is "
               "not confirmed. Check the key fingerprint with the author before relying on it.")
    return Verification(TrustState.UNKNOWN_SIGNER, file_fp, key_fp, None, signed_at, message)


def _tampered(file_fp: str, stated_fp: str | None, reason: str) -> Verification:
    """The verdict for a signature that does not verify."""
    message = (f"Signature check FAILED ({reason}): the calculator was changed after it was "
               "signed, or is damaged. Do not use it; get a fresh copy from its author.")
    return Verification(TrustState.TAMPERED, file_fp, stated_fp, None, None, message)


def _format_time(moment: datetime | None) -> str:
    """UTC time to the second, e.g. ``2026-12-02T10:00:00Z``."""
    if moment is None:
        moment = datetime.now(UTC)
    elif moment.tzinfo is None:
        raise ValueError("signed_at must be timezone-aware (e.g. datetime.now(UTC))")
    return moment.astimezone(UTC).strftime(_TIME_FORMAT)


def _valid_time(text: str) -> bool:
    """True for a real UTC time written like ``2026-12-02T10:00:00Z``."""
    if not _TIME_RE.fullmatch(text):
        return False
    try:
        datetime.strptime(text, _TIME_FORMAT)
    except ValueError:
        return False
    return True


def _sha256_hex(data: bytes) -> str:
    """SHA-256 hex digest."""
    return hashlib.sha256(data).hexdigest()
