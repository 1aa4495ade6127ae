"""The calculator document: a validated, immutable view of a ``*.calc.json`` file.

Loading goes in fixed order, and every step reports all of its problems at once:

1. strict JSON parsing (:mod:`calcbuilder.calc.jsonio`);
2. the format name and version are read first; older versions are upgraded
   (:mod:`calcbuilder.calc.upgrade`);
3. the structure is checked against the published JSON Schema;
4. each section is checked for meaning (limits, knots, covariance, ...);
5. every test vector is re-scored and must match within 1e-9 on the risk;
6. the signature is verified and the review-by date compared with today.

A file that fails 1-5 is refused (:class:`CalcFileError`); the signature and
review-by states are reported and the callers decide (a tampered file must not
compute: :meth:`LoadedCalculator.require_computable`).
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from ..errors import CalcFileError
from .canonical import canonical_bytes, fingerprint, split_signature
from .evidence_sets import EvidenceSet, parse_evidence
from .inputs import InputSpec, parse_inputs
from .jsonio import read_json_file, write_json_file
from .model import ModelSpec
from .problems import Problems
from .schema_check import FORMAT_NAME, FORMAT_VERSION, check_structure
from .sections import (
    About,
    Decision,
    TestVector,
    parse_about,
    parse_cautions,
    parse_decision,
    parse_test_vectors,
)
from .signing import TrustedKeys, TrustState, Verification, verify_document
from .upgrade import upgrade
from .vectors import check_test_vectors

__all__ = ["Calculator", "LoadedCalculator", "load_calculator", "save_calculator"]


@dataclass(frozen=True)
class Calculator:
    """Everything in a calculator file, validated; ``signature`` is kept as stored."""

    about: About
    inputs: tuple[InputSpec, ...]
    model: ModelSpec
    evidence: tuple[EvidenceSet, ...]
    decision: Decision
    cautions: tuple[str, ...]
    test_vectors: tuple[TestVector, ...]
    signature: dict[str, Any] | None = None

    @classmethod
    def from_dict(cls, raw: Any, *, check_vectors: bool = True) -> Calculator:
        """Validate a parsed document (any JSON value) and build the calculator.

        Raises :class:`CalcFileError` listing every problem with its JSON path.
        """
        doc = upgrade(raw)
        canonical_bytes(split_signature(doc)[0])  # refuses what cannot be fingerprinted or signed
        problems = Problems()
        check_structure(doc, problems)
        problems.raise_if_any("the calculator file does not match the format")
        calc = _build(doc, problems)
        problems.raise_if_any("the calculator file is inconsistent")
        assert calc is not None  # every None path above recorded a problem
        if check_vectors:
            check_test_vectors(calc)
        return calc

    def payload(self) -> dict[str, Any]:
        """The signed part of the document (everything except ``signature``)."""
        return {
            "format": FORMAT_NAME,
            "format_version": FORMAT_VERSION,
            "about": self.about.to_dict(),
            "inputs": [spec.to_dict() for spec in self.inputs],
            "model": self.model.to_dict(),
            "evidence": [e.to_dict() for e in self.evidence],
            "decision": self.decision.to_dict(),
            "cautions": list(self.cautions),
            "test_vectors": [v.to_dict() for v in self.test_vectors],
        }

    def to_dict(self) -> dict[str, Any]:
        """The whole document, signature included when present."""
        out = self.payload()
        if self.signature is not None:
            out["signature"] = dict(self.signature)
        return out

    @property
    def fingerprint(self) -> str:
        """SHA-256 (hex) of the RFC 8785 canonical bytes of the payload."""
        return fingerprint(self.payload())

    def input(self, input_id: str) -> InputSpec:
        """The input with this id (KeyError if unknown)."""
        for spec in self.inputs:
            if spec.id == input_id:
                return spec
        raise KeyError(input_id)


def _input_kinds(inputs: tuple[InputSpec, ...]) -> dict[str, tuple[str, tuple[str, ...]]]:
    return {
        spec.id: (spec.kind, tuple(c.value for c in spec.choices) if spec.choices else ())
        for spec in inputs
    }


def _build(doc: dict[str, Any], problems: Problems) -> Calculator | None:
    about = parse_about(doc["about"], "about", problems)
    inputs = parse_inputs(doc["inputs"], "inputs", problems)
    model = (
        ModelSpec.from_dict(doc["model"], "model", problems, _input_kinds(inputs))
        if inputs is not None
        else None
    )
    evidence = parse_evidence(doc.get("evidence", []), "evidence", problems)
    decision = parse_decision(doc["decision"], "decision", problems)
    cautions = parse_cautions(doc["cautions"], "cautions", problems)
    ids = {spec.id for spec in inputs} if inputs is not None else set()
    vectors = parse_test_vectors(doc["test_vectors"], "test_vectors", problems, ids)
    parts = (about, inputs, model, evidence, decision, cautions, vectors)
    if any(part is None for part in parts):
        return None
    return Calculator(
        about, inputs, model, evidence, decision, cautions, vectors,  # type: ignore[arg-type]
        doc.get("signature"),
    )


@dataclass(frozen=True)
class LoadedCalculator:
    """A calculator read from disk with its trust state."""

    calculator: Calculator
    verification: Verification
    path: Path | None
    expired: bool

    @property
    def fingerprint(self) -> str:
        """Fingerprint of the payload exactly as stored in the file."""
        return self.verification.file_fingerprint

    @property
    def state(self) -> TrustState:
        return self.verification.state

    def require_computable(self) -> None:
        """Refuse to compute with a file whose signature does not verify."""
        if self.state is TrustState.TAMPERED:
            raise CalcFileError(
                f"{self.path or 'the calculator file'} was changed after it was signed "
                "(its signature does not verify); it must not be used. Ask its author "
                "for a fresh copy."
            )


def load_calculator(
    path: str | Path,
    *,
    trusted: TrustedKeys | None = None,
    today: dt.date | None = None,
) -> LoadedCalculator:
    """Read, validate, re-score the test vectors, verify the signature, check review-by.

    A file whose signature does not verify is still returned (state ``TAMPERED``)
    so the caller can explain it, but :meth:`LoadedCalculator.require_computable`
    refuses it; schema, consistency and test-vector failures raise at once.
    """
    raw = read_json_file(path)
    calc = Calculator.from_dict(raw)  # raises unless raw is a valid calculator object
    verification = verify_document(raw, trusted)
    return LoadedCalculator(calc, verification, Path(path), calc.about.expired(today))


def save_calculator(calc: Calculator, path: str | Path) -> None:
    """Write the document atomically as pretty UTF-8 JSON."""
    write_json_file(path, calc.to_dict())
