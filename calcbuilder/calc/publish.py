"""Validate, sign and write a calculator file: the one routine behind ``calcbuilder sign``
and the authoring workspace's Publish step.

Nothing is written unless the document is a valid calculator (schema, meaning,
test vectors) and the signed text, read back exactly as it will be stored,
verifies.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey

from ..errors import CalcFileError, SignatureError
from .atomic import atomic_write_text
from .jsonio import dumps_pretty, parse_json
from .signing import TrustState, sign_document, verify_document

__all__ = ["SignedFile", "sign_calculator_file"]


@dataclass(frozen=True)
class SignedFile:
    """What was written: the file, its payload fingerprint and the signing key's fingerprint."""

    path: Path
    file_fingerprint: str
    key_fingerprint: str
    signed_at: str
    replaced_signature: bool


def sign_calculator_file(document: Mapping[str, Any], key: Ed25519PrivateKey,
                         output: str | Path, *, source: str = "calculator") -> SignedFile:
    """Validate ``document``, sign its payload (replacing any signature), write atomically.

    Raises
    ------
    CalcFileError
        The document is not a valid calculator (nothing written).
    SignatureError
        The signed text does not verify when read back (nothing written).
    """
    from .document import Calculator

    doc = dict(document)
    try:
        Calculator.from_dict(doc)
    except CalcFileError as exc:
        raise CalcFileError(f"{source}: will not sign an invalid calculator file: {exc}") from exc
    signed = sign_document(doc, key)
    text = dumps_pretty(signed)
    result = verify_document(parse_json(text, source=str(output)), None)
    if result.state is not TrustState.UNKNOWN_SIGNER:
        raise SignatureError(f"{output}: the signed text does not verify ({result.message}); "
                             "nothing was written")
    atomic_write_text(output, text)
    section = signed["signature"]
    return SignedFile(Path(output), result.file_fingerprint, section["key_fingerprint"],
                      section["signed_at"], "signature" in doc)
