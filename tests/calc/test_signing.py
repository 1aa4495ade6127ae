"""Ed25519 signatures over the canonical payload: trust states and tamper detection."""

from __future__ import annotations

import base64
import copy
from datetime import UTC, datetime, timedelta, timezone

import pytest
from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey
from hypothesis import given, settings
from hypothesis import strategies as st

from calcbuilder.calc.canonical import canonical_bytes, fingerprint
from calcbuilder.calc.jsonio import dumps_pretty, parse_json
from calcbuilder.calc.keys import TrustedKeys, key_fingerprint, raw_public_bytes
from calcbuilder.calc.signing import TrustState, sign_document, verify_document
from calcbuilder.errors import CalcFileError, SignatureError

KEY_A = Ed25519PrivateKey.generate()
KEY_B = Ed25519PrivateKey.generate()
WHEN = datetime(2026, 12, 2, 10, 0, 0, tzinfo=UTC)


def small_document() -> dict:
    """A small synthetic calculator-like document (not clinical)."""
    return {
        "format": "calcbuilder-calculator",
        "format_version": 1,
        "about": {"title": "Synthetic demo", "synthetic": True, "unit": "µmol/L"},
        "model": {"family": "logistic", "intercept": -2.1,
                  "terms": [{"name": "age", "coefficients": [0.0213, -0.5]},
                            {"name": "crea", "coefficients": [0.0041]}]},
        "limits": [10, 2000],
        "cautions": ["Synthetic, not for clinical use."],
    }


@pytest.fixture
def trusted(tmp_path):
    keys = TrustedKeys(tmp_path / "trusted-keys")
    keys.add(KEY_A.public_key(), "Demo statistics unit")
    return keys


def signed(document=None, key=KEY_A):
    return sign_document(document or small_document(), key, signed_at=WHEN)


def test_round_trip_verified_with_trusted_key(trusted):
    doc = signed()
    result = verify_document(doc, trusted)
    assert result.state is TrustState.VERIFIED
    assert result.may_compute
    assert result.signer == "Demo statistics unit"
    assert result.key_fingerprint == key_fingerprint(KEY_A.public_key())
    assert result.file_fingerprint == fingerprint(small_document())
    assert result.signed_at == "2026-12-02T10:00:00Z"
    assert "trusts" in result.message


def test_signature_section_matches_format():
    section = signed()["signature"]
    assert list(section) == ["algorithm", "public_key", "key_fingerprint", "signed_at", "value"]
    assert section["algorithm"] == "ed25519"
    assert base64.b64decode(section["public_key"]) == raw_public_bytes(KEY_A.public_key())
    KEY_A.public_key().verify(base64.b64decode(section["value"]),
                              canonical_bytes(small_document()))


def test_valid_signature_without_trust_list_is_unknown_signer():
    result = verify_document(signed(), None)
    assert result.state is TrustState.UNKNOWN_SIGNER
    assert result.may_compute
    assert result.signer is None
    assert "not on this clinic's trusted list" in result.message


def test_signature_by_another_key_is_unknown_signer(trusted):
    result = verify_document(signed(key=KEY_B), trusted)
    assert result.state is TrustState.UNKNOWN_SIGNER
    assert result.key_fingerprint == key_fingerprint(KEY_B.public_key())


def test_unsigned(trusted):
    result = verify_document(small_document(), trusted)
    assert result.state is TrustState.UNSIGNED
    assert result.may_compute
    assert result.key_fingerprint is None
    assert "Not signed" in result.message


def test_edited_coefficient_is_tampered(trusted):
    doc = signed()
    doc["model"]["terms"][0]["coefficients"][0] = 0.0214
    result = verify_document(doc, trusted)
    assert result.state is TrustState.TAMPERED
    assert not result.may_compute
    assert "FAILED" in result.message
    with pytest.raises(SignatureError, match=r"demo\.calc\.json: Signature check FAILED"):
        result.require_computable("demo.calc.json")


def test_swapped_public_key_is_tampered(trusted):
    doc = signed()
    other = raw_public_bytes(KEY_B.public_key())
    doc["signature"]["public_key"] = base64.b64encode(other).decode()
    result = verify_document(doc, trusted)
    assert result.state is TrustState.TAMPERED
    assert "key_fingerprint does not match" in result.message
    doc["signature"]["key_fingerprint"] = key_fingerprint(other)  # consistent swap
    result = verify_document(doc, trusted)
    assert result.state is TrustState.TAMPERED
    assert "does not match the content" in result.message


def test_trusted_fingerprint_with_other_key_bytes_is_not_verified(trusted, monkeypatch):
    entry = trusted.entries()[0]
    fake = type(entry)(entry.key_fingerprint, entry.name, b"\x00" * 32, entry.path)
    monkeypatch.setattr(TrustedKeys, "find", lambda *_: fake)
    assert verify_document(signed(), trusted).state is TrustState.UNKNOWN_SIGNER


def _mutate(section, field, value):
    section = dict(section)
    if value is _DROP:
        del section[field]
    else:
        section[field] = value
    return section


_DROP = object()
_GOOD = signed()["signature"]


@pytest.mark.parametrize(("section", "words"), [
    ("not an object", "'signature' is not an object"),
    (None, "'signature' is not an object"),
    (_mutate(_GOOD, "signed_at", _DROP), "missing signed_at"),
    (_mutate(_GOOD, "comment", "hello"), "unknown comment"),
    (_mutate(_GOOD, "algorithm", "rsa"), "signature.algorithm"),
    (_mutate(_GOOD, "public_key", "!!!"), "signature.public_key"),
    (_mutate(_GOOD, "public_key", base64.b64encode(b"x" * 31).decode()), "signature.public_key"),
    (_mutate(_GOOD, "public_key", 12), "signature.public_key"),
    (_mutate(_GOOD, "public_key", _GOOD["public_key"][:-2] + "x="), "signature.public_key"),
    (_mutate(_GOOD, "value", _GOOD["value"][:-4]), "signature.value"),
    (_mutate(_GOOD, "value", base64.b64encode(b"\0" * 64).decode()), "does not match"),
    (_mutate(_GOOD, "key_fingerprint", "0" * 64), "key_fingerprint does not match"),
    (_mutate(_GOOD, "signed_at", "2 Dec 2026"), "signature.signed_at"),
    (_mutate(_GOOD, "signed_at", "2026-13-02T10:00:00Z"), "signature.signed_at"),
])
def test_malformed_signature_section_is_tampered(section, words, trusted):
    doc = {**small_document(), "signature": section}
    result = verify_document(doc, trusted)
    assert result.state is TrustState.TAMPERED
    assert words in result.message


def test_sign_replaces_old_signature_and_leaves_input_alone():
    first = signed()
    before = copy.deepcopy(first)
    second = sign_document(first, KEY_B, signed_at=WHEN + timedelta(days=1))
    assert first == before
    assert list(second)[-1] == "signature"
    assert second["signature"]["key_fingerprint"] == key_fingerprint(KEY_B.public_key())
    assert second["signature"]["signed_at"] == "2026-12-03T10:00:00Z"
    assert verify_document(second, None).state is TrustState.UNKNOWN_SIGNER


def test_signed_at_in_utc_and_must_be_aware():
    cet = timezone(timedelta(hours=1))
    doc = sign_document(small_document(), KEY_A, signed_at=datetime(2026, 12, 2, 11, tzinfo=cet))
    assert doc["signature"]["signed_at"] == "2026-12-02T10:00:00Z"
    with pytest.raises(ValueError, match="timezone-aware"):
        sign_document(small_document(), KEY_A, signed_at=datetime(2026, 12, 2))
    now = sign_document(small_document(), KEY_A)["signature"]["signed_at"]
    assert now.endswith("Z")


def test_sign_refuses_other_key_types():
    with pytest.raises(SignatureError, match="not an Ed25519 private key"):
        sign_document(small_document(), KEY_A.public_key())


def test_payload_without_canonical_form_is_refused():
    with pytest.raises(CalcFileError, match=r"model\.intercept"):
        sign_document({**small_document(), "model": {"intercept": float("nan")}}, KEY_A)


# -- tampering, byte by byte -----------------------------------------------------------------

def _outcome(data: bytes, trusted) -> str:
    """'refused' (unreadable or not canonical) or the trust state's value."""
    try:
        document = parse_json(data, source="flipped")
        if not isinstance(document, dict):
            return "refused"
        return verify_document(document, trusted).state.value
    except CalcFileError:
        return "refused"


def _signed_file() -> tuple[bytes, int]:
    data = dumps_pretty(signed()).encode("utf-8")
    return data, data.index(b'"signature"')


def test_flipping_any_payload_byte_is_detected(trusted):
    data, payload_end = _signed_file()
    assert _outcome(data, trusted) == "verified"
    outcomes = []
    for i in range(payload_end):
        flipped = bytearray(data)
        flipped[i] ^= 0x01
        outcomes.append(_outcome(bytes(flipped), trusted))
    assert set(outcomes) <= {"refused", "tampered"}
    assert outcomes.count("tampered") > 100  # many flips still parse: all are caught


def test_any_single_bit_flip_changing_a_value_is_detected(trusted):
    # All 8 bits of every payload byte. A flip may only pass if the payload's *values*
    # are unchanged (e.g. an exponent written 'E' instead of 'e'): the signature
    # covers values, not spelling, and every computation sees the same numbers.
    data, payload_end = _signed_file()
    reference = canonical_bytes({k: v for k, v in parse_json(data).items() if k != "signature"})
    for i in range(payload_end):
        for bit in range(8):
            flipped = bytearray(data)
            flipped[i] ^= 1 << bit
            outcome = _outcome(bytes(flipped), trusted)
            if outcome in ("verified", "unknown_signer", "unsigned"):
                doc = parse_json(bytes(flipped))
                payload = {k: v for k, v in doc.items() if k != "signature"}
                assert canonical_bytes(payload) == reference, (i, bit)


def test_flips_in_signature_section_never_verify_a_changed_file(trusted):
    data, payload_end = _signed_file()
    time_at = data.index(b"2026-12-02T10:00:00Z")
    time_span = range(time_at, time_at + 20)
    for i in range(payload_end, len(data)):
        flipped = bytearray(data)
        flipped[i] ^= 0x01
        outcome = _outcome(bytes(flipped), trusted)
        if i in time_span:
            # signed_at is not covered by the signature (FORMAT.md signs the payload only):
            # a changed but valid time still verifies; a malformed one is refused.
            assert outcome in {"verified", "tampered", "refused"}
        else:
            # e.g. a renamed "signature" key makes an unsigned file with an unknown member
            assert outcome in {"refused", "tampered", "unsigned"}, i


def _numeric_paths(value, path=()):
    if isinstance(value, dict):
        for key, item in value.items():
            yield from _numeric_paths(item, (*path, key))
    elif isinstance(value, list):
        for i, item in enumerate(value):
            yield from _numeric_paths(item, (*path, i))
    elif isinstance(value, int | float) and not isinstance(value, bool):
        yield path


NUMERIC_PATHS = list(_numeric_paths(small_document()))


@settings(max_examples=150, deadline=None)
@given(st.sampled_from(NUMERIC_PATHS),
       st.floats(allow_nan=False, allow_infinity=False, min_value=-1e15, max_value=1e15))
def test_editing_any_number_is_detected(path, new_value):
    doc = signed()
    holder = doc
    for key in path[:-1]:
        holder = holder[key]
    if holder[path[-1]] == new_value:
        return  # not an edit
    holder[path[-1]] = new_value
    assert verify_document(doc, None).state is TrustState.TAMPERED


def test_equivalent_number_spelling_keeps_the_signature(trusted):
    # 2000 and 2.0e3 are the same double, so the canonical payload is unchanged.
    data, _ = _signed_file()
    respelled = data.replace(b"2000", b"2.0e3", 1)
    assert respelled != data
    document = parse_json(respelled)
    assert verify_document(document, trusted).state is TrustState.VERIFIED
    assert fingerprint(document) == fingerprint(small_document())
