"""Commands ``keys`` (signing keys and the clinic's trusted list) and ``sign``.

``calcbuilder keys new DIR [--name NAME] [--passphrase-file FILE | --no-passphrase]``
``calcbuilder keys trust PUBKEY [--name LABEL] [--expect-fingerprint FP]``
``calcbuilder keys list`` / ``calcbuilder keys untrust FINGERPRINT``
``calcbuilder sign FILE --key KEY -o OUT [--passphrase-file FILE]``
"""

from __future__ import annotations

import argparse
import getpass
import json
import sys
from pathlib import Path
from typing import Any

from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey

from ..calc.jsonio import read_json_file
from ..calc.keys import (
    DEFAULT_KEY_NAME,
    UNENCRYPTED_WARNING,
    TrustedKeys,
    generate_private_key,
    key_fingerprint,
    load_private_key,
    load_public_key,
    normalise_fingerprint,
    private_key_is_encrypted,
    public_key_label,
    save_key_pair,
)
from ..errors import CalcFileError, SignatureError

__all__ = ["register"]

CALCULATOR_FORMAT = "calcbuilder-calculator"
_SHORT_PASSPHRASE = 12


def register(sub: argparse._SubParsersAction) -> None:
    """Register the ``keys`` command group and the ``sign`` command."""
    keys = sub.add_parser("keys", help="create signing keys; manage the clinic's trusted keys",
                          description="Create signing keys and manage the list of public keys "
                                      "this computer trusts.")
    actions = keys.add_subparsers(dest="keys_action", metavar="ACTION")
    actions.required = True
    _register_new(actions)
    _register_trust(actions)
    listing = actions.add_parser("list", help="list the trusted keys")
    _add_json(listing)
    listing.set_defaults(func=_cmd_list)
    untrust = actions.add_parser("untrust", help="remove a key from the trusted list")
    untrust.add_argument("fingerprint", metavar="FINGERPRINT",
                         help="the key fingerprint, or its first 8 or more digits")
    untrust.set_defaults(func=_cmd_untrust)
    _register_sign(sub)


def _register_new(actions: argparse._SubParsersAction) -> None:
    new = actions.add_parser("new", help="create a signing key pair",
                             description="Create an Ed25519 key pair: DIR/NAME.key (private, "
                                         "passphrase-protected) and DIR/NAME.pub (public).")
    new.add_argument("directory", metavar="DIR", type=Path, help="folder for the key files")
    new.add_argument("--name", default=DEFAULT_KEY_NAME,
                     help=f"file name stem (default {DEFAULT_KEY_NAME})")
    secret = new.add_mutually_exclusive_group()
    secret.add_argument("--passphrase-file", type=Path, metavar="FILE",
                        help="read the passphrase from the first line of FILE")
    secret.add_argument("--no-passphrase", action="store_true",
                        help="save the private key unencrypted (demo keys only)")
    _add_json(new)
    new.set_defaults(func=_cmd_new)


def _register_trust(actions: argparse._SubParsersAction) -> None:
    trust = actions.add_parser("trust", help="add a public key to the trusted list")
    trust.add_argument("pubkey", metavar="PUBKEY", type=Path, help="the signer's .pub file")
    trust.add_argument("--name", metavar="LABEL",
                       help="who the key belongs to (default: the name in the .pub file)")
    trust.add_argument("--expect-fingerprint", metavar="FP",
                       help="refuse unless the key has this fingerprint (as told by its owner)")
    _add_json(trust)
    trust.set_defaults(func=_cmd_trust)


def _register_sign(sub: argparse._SubParsersAction) -> None:
    sign = sub.add_parser("sign", help="sign a calculator file",
                          description="Sign a calculator file with an Ed25519 private key; "
                                      "any previous signature is replaced.")
    sign.add_argument("file", metavar="FILE", type=Path, help="the calculator file (.calc.json)")
    sign.add_argument("--key", required=True, type=Path, metavar="KEY",
                      help="the private key file (.key)")
    sign.add_argument("-o", "--output", required=True, type=Path, metavar="OUT",
                      help="where to write the signed file (may equal FILE)")
    sign.add_argument("--passphrase-file", type=Path, metavar="FILE",
                      help="read the key's passphrase from the first line of FILE")
    _add_json(sign)
    sign.set_defaults(func=_cmd_sign)


def _add_json(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--json", action="store_true", help="print the result as JSON")


# -- keys new / trust / list / untrust -------------------------------------------------------

def _cmd_new(args: argparse.Namespace) -> int:
    passphrase: bytes | None
    if args.no_passphrase:
        passphrase = None
    elif args.passphrase_file is not None:
        passphrase = _read_passphrase_file(args.passphrase_file)
    else:
        passphrase = _prompt_new_passphrase()
    files = save_key_pair(args.directory, args.name, generate_private_key(),
                          passphrase=passphrase)
    if passphrase is None:
        _warn("keys", UNENCRYPTED_WARNING)
    elif len(passphrase) < _SHORT_PASSPHRASE:
        _warn("keys", f"the passphrase is shorter than {_SHORT_PASSPHRASE} characters; anyone "
                      "who copies the key file could guess it. Prefer a longer one.")
    if args.json:
        return _print_json({"private_key": str(files.private_key),
                            "public_key": str(files.public_key),
                            "key_fingerprint": files.key_fingerprint,
                            "encrypted": files.encrypted})
    print(f"Created a signing key pair in {args.directory}:")
    print(f"  private key: {files.private_key}  (keep it secret; it signs calculators)")
    print(f"  public key:  {files.public_key}  (give it to clinics: "
          f"calcbuilder keys trust {files.public_key})")
    print(f"key fingerprint: {files.key_fingerprint}")
    return 0


def _cmd_trust(args: argparse.Namespace) -> int:
    public_key = load_public_key(args.pubkey)
    fp = key_fingerprint(public_key)
    if args.expect_fingerprint is not None and normalise_fingerprint(
            args.expect_fingerprint) != fp:
        raise SignatureError(f"{args.pubkey}: the key fingerprint is {fp}, not the expected "
                             f"{args.expect_fingerprint}; do not trust this file, ask its "
                             "owner for the right key")
    trusted = TrustedKeys()
    label = args.name or _default_label(args.pubkey)
    entry = trusted.add(public_key, label)
    if args.json:
        return _print_json({"key_fingerprint": entry.key_fingerprint, "name": entry.name,
                            "path": str(entry.path)})
    print(f"Trusted: {entry.name}")
    print(f"key fingerprint: {entry.key_fingerprint}")
    print(f"stored in {entry.path}")
    return 0


def _cmd_list(args: argparse.Namespace) -> int:
    trusted = TrustedKeys()
    entries = trusted.entries()
    for problem in trusted.problems():
        _warn("keys", problem)
    if args.json:
        return _print_json({"directory": str(trusted.directory),
                            "keys": [{"key_fingerprint": e.key_fingerprint, "name": e.name,
                                      "path": str(e.path)} for e in entries]})
    if not entries:
        print(f"No trusted signing keys (folder: {trusted.directory}).")
        print("Add one with: calcbuilder keys trust FILE.pub")
        return 0
    print(f"Trusted signing keys (folder: {trusted.directory}):")
    for entry in entries:
        print(f"  {entry.key_fingerprint}  {entry.name}")
    return 0


def _cmd_untrust(args: argparse.Namespace) -> int:
    entry = TrustedKeys().remove(args.fingerprint)
    print(f"No longer trusted: {entry.name}")
    print(f"key fingerprint: {entry.key_fingerprint}")
    return 0


# -- sign ------------------------------------------------------------------------------------

def _cmd_sign(args: argparse.Namespace) -> int:
    from ..calc.publish import sign_calculator_file

    document = _read_document(args.file)
    private_key = _load_signing_key(args.key, args.passphrase_file)
    done = sign_calculator_file(document, private_key, args.output, source=str(args.file))
    if args.json:
        return _print_json({"output": str(args.output), "file_fingerprint":
                            done.file_fingerprint, "key_fingerprint": done.key_fingerprint,
                            "signed_at": done.signed_at})
    if done.replaced_signature:
        print("(the previous signature was replaced)")
    print(f"Signed calculator written to {args.output}")
    print(f"file fingerprint: {done.file_fingerprint}")
    print(f"key fingerprint:  {done.key_fingerprint}")
    return 0


def _read_document(path: Path) -> dict[str, Any]:
    """Read and strictly parse a calculator file; refuse anything but a JSON object."""
    document = read_json_file(path)
    if not isinstance(document, dict):
        raise CalcFileError(f"calculator file {path}: must be a JSON object ({{...}}); "
                            "check that this is a calculator file")
    return document


def _load_signing_key(path: Path, passphrase_file: Path | None) -> Ed25519PrivateKey:
    """Load the private key, asking for its passphrase only if it is encrypted."""
    if not private_key_is_encrypted(path):
        _warn("sign", UNENCRYPTED_WARNING)
        return load_private_key(path, None)
    if passphrase_file is not None:
        return load_private_key(path, _read_passphrase_file(passphrase_file))
    if not _stdin_is_terminal():
        raise SignatureError(f"{path}: the private key needs its passphrase and there is no "
                             "terminal to ask on; use --passphrase-file FILE")
    return load_private_key(path, getpass.getpass(f"Passphrase for {path}: ").encode())


# -- passphrases and output ------------------------------------------------------------------

def _read_passphrase_file(path: Path) -> bytes:
    """The first line of a passphrase file (without its line ending)."""
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise SignatureError(f"{path}: cannot read the passphrase file "
                             f"({exc.strerror or exc})") from exc
    secret = data.split(b"\n", 1)[0].rstrip(b"\r")
    if not secret:
        raise SignatureError(f"{path}: the passphrase file's first line is empty; write the "
                             "passphrase on it")
    return secret


def _prompt_new_passphrase() -> bytes:
    """Ask twice on the terminal; refuse when there is no terminal."""
    if not _stdin_is_terminal():
        raise SignatureError("no passphrase given and no terminal to ask on; use "
                             "--passphrase-file FILE (or --no-passphrase for a demo key only)")
    first = getpass.getpass("Passphrase for the new private key: ")
    if not first:
        raise SignatureError("empty passphrase; nothing was written")
    if getpass.getpass("The same passphrase again: ") != first:
        raise SignatureError("the two passphrases differ; nothing was written")
    return first.encode()


def _stdin_is_terminal() -> bool:
    """True when a person can be asked for a passphrase."""
    try:
        return sys.stdin is not None and sys.stdin.isatty()
    except (AttributeError, ValueError):
        return False


def _default_label(pubkey: Path) -> str:
    """The ``Name:`` of a ``.pub`` file, else its file name stem."""
    return public_key_label(pubkey) or pubkey.stem


def _warn(command: str, message: str) -> None:
    print(f"calcbuilder {command}: warning: {message}", file=sys.stderr)


def _print_json(value: dict[str, Any]) -> int:
    print(json.dumps(value, indent=2, ensure_ascii=False))
    return 0
