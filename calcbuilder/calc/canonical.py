"""Canonical form (RFC 8785) and fingerprint of a calculator file's payload.

The **payload** is the calculator document without its top-level ``signature``
section. Its canonical form is the RFC 8785 JSON Canonicalization Scheme
serialisation (computed by the ``rfc8785`` package): keys sorted by UTF-16
code units, no whitespace, numbers written the way ECMAScript writes IEEE 754
doubles, UTF-8. The **file fingerprint** is the SHA-256 (hex) of those bytes;
the signature is made over the same bytes.

Consequences worth knowing
--------------------------
- The signature covers *values*, not spelling: ``1.0``, ``1`` and ``1E0`` are
  the same number, and re-indenting a file does not break its signature.
- JSON numbers are IEEE 754 doubles. Integers outside +-(2**53 - 1), NaN and
  infinities cannot be canonicalised and are refused with their JSON path, as
  are strings holding lone surrogates and non-JSON Python values.
- ``-0.0`` is written ``0`` (RFC 8785), so it signs like ``0``.

Reading files strictly and writing them is :mod:`calcbuilder.calc.jsonio`'s job.
"""

from __future__ import annotations

import hashlib
import math
from typing import Any

import rfc8785

from ..errors import CalcFileError
from .problems import Problems, join

__all__ = [
    "MAX_SAFE_INTEGER",
    "SIGNATURE_KEY",
    "canonical_bytes",
    "fingerprint",
    "split_signature",
]

SIGNATURE_KEY = "signature"
MAX_SAFE_INTEGER = 2**53 - 1
_MAX_REPORTED = 20


def canonical_bytes(payload: dict[str, Any]) -> bytes:
    """The RFC 8785 canonical UTF-8 bytes of ``payload``.

    Parameters
    ----------
    payload : dict
        A JSON object (as :func:`json.loads` returns). It is serialised as
        given: a ``signature`` key, if present, is included.

    Returns
    -------
    bytes
        The canonical serialisation.

    Raises
    ------
    CalcFileError
        Listing, with JSON paths, every value RFC 8785 cannot represent.
    """
    problems = _uncanonical_values(payload)
    problems.raise_if_any("the calculator cannot be put in canonical form (RFC 8785) "
                          "for signing or fingerprinting")
    try:
        return rfc8785.dumps(payload)
    except (rfc8785.CanonicalizationError, RecursionError) as exc:  # defensive: pre-checked
        raise CalcFileError(f"the calculator cannot be put in canonical form (RFC 8785): "
                            f"{exc}") from exc


def fingerprint(payload: dict[str, Any]) -> str:
    """The file fingerprint: SHA-256 (lowercase hex) of the canonical payload.

    A top-level ``signature`` section is left out, so a signed document, the
    same document unsigned, and its payload all have the same fingerprint.

    Parameters
    ----------
    payload : dict
        The payload, or a whole calculator document.

    Returns
    -------
    str
        64 hexadecimal digits.
    """
    body, _ = split_signature(payload)
    return hashlib.sha256(canonical_bytes(body)).hexdigest()


def split_signature(document: dict[str, Any]) -> tuple[dict[str, Any], Any | None]:
    """Separate the payload from the ``signature`` section.

    Parameters
    ----------
    document : dict
        A calculator document.

    Returns
    -------
    payload : dict
        A new dict with every top-level member except ``signature``, in order.
    signature : object or None
        The ``signature`` value as found (normally a dict; checking it is the
        verifier's job), or None when the document has no ``signature``.

    Raises
    ------
    CalcFileError
        If ``document`` is not a JSON object.
    """
    if not isinstance(document, dict):
        raise CalcFileError(f"$: a calculator file must be a JSON object ({{...}}), "
                            f"found {_json_type(document)}; check that this is a calculator file")
    payload = {key: value for key, value in document.items() if key != SIGNATURE_KEY}
    return payload, document.get(SIGNATURE_KEY)


def _uncanonical_values(root: Any) -> Problems:
    """Every value RFC 8785 cannot serialise, with its JSON path (iterative walk)."""
    problems = Problems()
    stack: list[tuple[str, Any]] = [("", root)]
    seen: set[int] = set()  # containers already walked (also stops on cycles)
    while stack and len(problems.items) < _MAX_REPORTED:
        path, value = stack.pop()
        if isinstance(value, dict | list | tuple):
            if id(value) in seen:
                continue
            seen.add(id(value))
        if isinstance(value, dict):
            for key, item in reversed(value.items()):
                if not isinstance(key, str):
                    problems.add(path, f"object key {key!r} is not a string; JSON keys are text")
                else:
                    _check_text(problems, join(path, key), key, "key")
                    stack.append((join(path, key), item))
        elif isinstance(value, list | tuple):
            stack.extend((join(path, i), item) for i, item in reversed(list(enumerate(value))))
        else:
            _check_scalar(problems, path, value)
    return problems


def _check_scalar(problems: Problems, path: str, value: Any) -> None:
    """Record a problem if a scalar has no RFC 8785 form."""
    if value is None or isinstance(value, bool):
        return
    if isinstance(value, int):
        if abs(value) > MAX_SAFE_INTEGER:
            problems.add(path, f"integer {value} is outside +-(2**53 - 1), the range a JSON "
                               "number holds exactly; write it as a string or a decimal number")
    elif isinstance(value, float):
        if not math.isfinite(value):
            problems.add(path, f"{value} is not a finite number; JSON (RFC 8785) has no NaN or "
                               "infinity: use a finite value or leave the field out")
    elif isinstance(value, str):
        _check_text(problems, path, value, "text")
    else:
        problems.add(path, f"a {type(value).__name__} is not a JSON value; convert it to a "
                           "number, text, true/false, null, list or object")


def _check_text(problems: Problems, path: str, text: str, what: str) -> None:
    """Record a problem if ``text`` is not encodable as UTF-8 (lone surrogates)."""
    try:
        text.encode("utf-8")
    except UnicodeEncodeError:
        problems.add(path, f"the {what} contains an unpaired UTF-16 surrogate, which is not "
                           "valid Unicode text; correct the text")


def _json_type(value: Any) -> str:
    """The JSON name of a Python value's type, for messages."""
    names = {dict: "an object", list: "an array", str: "a string", bool: "true/false",
             int: "a number", float: "a number", type(None): "null"}
    return names.get(type(value), type(value).__name__)
