"""Step 6, Publish: sign the calculator with the author's key, write it and its evidence report.

Signing does what ``calcbuilder sign`` does, in the same order: validate the
whole calculator (schema, meaning, test vectors), sign the canonical payload
(:func:`calcbuilder.calc.signing.sign_document`), check that the text as written
reads back to a document whose signature verifies, then write it atomically.
The evidence report is made from the written file, loaded exactly as the
clinic form loads it, with the author's public key trusted
(``calcbuilder report FILE --trust KEY.pub``). Keys are created and opened by
:mod:`calcbuilder.calc.keys` (``calcbuilder keys new``).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey

from ..calc.keys import (
    DEFAULT_KEY_NAME,
    KeyPairFiles,
    generate_private_key,
    load_private_key,
    private_key_is_encrypted,
    save_key_pair,
)
from ._paths import absolute, relative

__all__ = ["PAGES", "PublishStep", "Published", "create_key", "open_key", "sign_and_write",
           "write_report"]

PAGES = ("A4", "Letter")
SHORT_PASSPHRASE = 12
"""Passphrases shorter than this get a warning (as ``calcbuilder keys new`` gives)."""


@dataclass(frozen=True)
class Published:
    """What publishing wrote."""

    calculator: Path
    file_fingerprint: str
    key_fingerprint: str
    signed_at: str
    report: Path | None = None
    report_pages: int = 0


def sign_and_write(document: Mapping[str, Any], key: Ed25519PrivateKey, output: Path
                   ) -> Published:
    """Validate, sign and write a calculator document as ``calcbuilder sign`` does.

    Raises
    ------
    CalcFileError
        The document is not a valid calculator (nothing written).
    SignatureError
        The signed text does not verify when read back (nothing written).
    """
    from ..calc.publish import sign_calculator_file

    done = sign_calculator_file(document, key, output, source=str(output))
    return Published(output, done.file_fingerprint, done.key_fingerprint, done.signed_at)


def write_report(published: Published, public_key: Path, report: Path, page: str
                 ) -> Published:
    """The evidence report of the written file (``calcbuilder report FILE --trust KEY``)."""
    from dataclasses import replace

    from ..calc.document import load_calculator
    from ..calc.keys import TrustedKeys
    from ..reports.evidence_report import make_report

    loaded = load_calculator(published.calculator,
                             trusted=TrustedKeys(extra_files=(public_key,)))
    info = make_report(loaded, report, page=page)  # type: ignore[arg-type]
    return replace(published, report=report, report_pages=info.pages)


def create_key(directory: Path, name: str, passphrase: str | None) -> KeyPairFiles:
    """A new Ed25519 key pair ``NAME.key`` / ``NAME.pub`` (``calcbuilder keys new``)."""
    return save_key_pair(directory, name, generate_private_key(),
                         passphrase=passphrase.encode() if passphrase else None)


def open_key(path: Path, passphrase: str | None) -> Ed25519PrivateKey:
    """Open a private key; the passphrase is used only when the key is encrypted."""
    if not private_key_is_encrypted(path):
        return load_private_key(path, None)
    return load_private_key(path, (passphrase or "").encode())


def key_needs_passphrase(path: Path) -> bool:
    return private_key_is_encrypted(path)


@dataclass
class PublishStep:
    """Where to publish, with which key; what was published last."""

    output: Path | None = None
    key_path: Path | None = None
    report_path: Path | None = None
    page: str = "A4"
    key_name: str = DEFAULT_KEY_NAME
    last: Published | None = None

    @property
    def public_key(self) -> Path | None:
        """The public key beside the private key (``NAME.pub``)."""
        return None if self.key_path is None else self.key_path.with_suffix(".pub")

    def suggest(self, folder: Path, title: str) -> None:
        """Fill in file names below ``folder`` from the calculator title where none is set."""
        import re

        stem = re.sub(r"[^a-z0-9]+", "-", title.lower()).strip("-")
        if len(stem) > 40:
            stem = stem[:40].rsplit("-", 1)[0]
        stem = stem or "calculator"
        if self.output is None:
            self.output = folder / f"{stem}.calc.json"
        if self.report_path is None:
            self.report_path = folder / f"{stem}.evidence.pdf"

    def problems(self) -> dict[str, list[str]]:
        """What is missing before publishing, by field key."""
        out: dict[str, list[str]] = {}
        if self.output is None:
            out["publish.output"] = ["choose where to write the calculator file"]
        elif not self.output.name.endswith(".calc.json"):
            out["publish.output"] = ["the file name must end in .calc.json"]
        if self.key_path is None:
            out["publish.key"] = ["choose your private key, or create one"]
        elif not self.key_path.is_file():
            out["publish.key"] = [f"no key file at {self.key_path}"]
        elif self.public_key is None or not self.public_key.is_file():
            out["publish.key"] = [f"the public key {self.key_path.with_suffix('.pub').name} "
                                  "must lie beside the private key"]
        if self.page not in PAGES:
            out["publish.page"] = ["A4 or Letter"]
        return out

    def to_dict(self, base: Path | None) -> dict[str, Any]:
        return {"output": relative(self.output, base), "key": relative(self.key_path, base),
                "report": relative(self.report_path, base), "page": self.page,
                "key_name": self.key_name}

    @classmethod
    def from_dict(cls, raw: Mapping[str, Any], base: Path | None) -> PublishStep:
        return cls(output=absolute(raw.get("output"), base),
                   key_path=absolute(raw.get("key"), base),
                   report_path=absolute(raw.get("report"), base),
                   page=str(raw.get("page", "A4")),
                   key_name=str(raw.get("key_name", DEFAULT_KEY_NAME)))
