"""The ``keys`` and ``sign`` commands: exit codes, messages, files written."""

from __future__ import annotations

import json
import stat
import sys
from pathlib import Path

import pytest

from calcbuilder.calc.canonical import fingerprint
from calcbuilder.calc.jsonio import read_json_file
from calcbuilder.calc.keys import CONFIG_DIR_ENV, TrustedKeys, key_fingerprint, load_public_key
from calcbuilder.calc.signing import TrustState, verify_document
from calcbuilder.cli import keys as cli_keys
from calcbuilder.cli import main

# a complete, valid calculator (statsmodels spector fit; see tests/calc/fixtures)
DOCUMENT = json.loads(
    (Path(__file__).parents[1] / "calc" / "fixtures" / "format-v1.calc.json").read_text("utf-8")
)
DOCUMENT["about"]["population"] += " (scores in µmol/L-free points)"  # a non-ASCII character


@pytest.fixture(autouse=True)
def isolated(tmp_path, monkeypatch):
    monkeypatch.setenv(CONFIG_DIR_ENV, str(tmp_path / "config"))
    monkeypatch.setattr(cli_keys, "_stdin_is_terminal", lambda: False)
    monkeypatch.chdir(tmp_path)


@pytest.fixture
def passfile(tmp_path):
    path = tmp_path / "pass.txt"
    path.write_text("correct horse battery staple\n")
    return path


@pytest.fixture
def keydir(tmp_path, passfile):
    assert main(["keys", "new", str(tmp_path / "k"), "--passphrase-file", str(passfile)]) == 0
    return tmp_path / "k"


@pytest.fixture
def calc(tmp_path):
    path = tmp_path / "demo.calc.json"
    path.write_text(json.dumps(DOCUMENT), encoding="utf-8")
    return path


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def one_line_error(err: str, *words: str) -> None:
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert "Traceback" not in err
    for word in words:
        assert word in lines[0]


# -- keys new ----------------------------------------------------------------------------------

def test_keys_new(tmp_path, passfile, capsys):
    code, out, err = run(capsys, "keys", "new", tmp_path / "k", "--passphrase-file", passfile)
    assert code == 0, err
    key = tmp_path / "k" / "calcbuilder-signing.key"
    pub = tmp_path / "k" / "calcbuilder-signing.pub"
    assert key.exists()
    assert pub.exists()
    if sys.platform != "win32":
        assert stat.S_IMODE(key.stat().st_mode) == 0o600
    assert f"key fingerprint: {key_fingerprint(load_public_key(pub))}" in out
    assert err == ""


def test_keys_new_with_name_and_json(tmp_path, passfile, capsys):
    code, out, _ = run(capsys, "keys", "new", tmp_path, "--name", "unit-b", "--passphrase-file",
                       passfile, "--json")
    assert code == 0
    result = json.loads(out)
    assert result["public_key"].endswith("unit-b.pub")
    assert result["encrypted"] is True
    assert result["key_fingerprint"] == key_fingerprint(load_public_key(result["public_key"]))


def test_keys_new_refuses_overwrite(keydir, passfile, capsys):
    before = (keydir / "calcbuilder-signing.key").read_bytes()
    code, _, err = run(capsys, "keys", "new", keydir, "--passphrase-file", passfile)
    assert code == 1
    one_line_error(err, "calcbuilder keys: error:", "already exists")
    assert (keydir / "calcbuilder-signing.key").read_bytes() == before


def test_keys_new_without_terminal_asks_for_passphrase_file(tmp_path, capsys):
    code, _, err = run(capsys, "keys", "new", tmp_path / "k")
    assert code == 1
    one_line_error(err, "--passphrase-file")
    assert not (tmp_path / "k").exists()


def test_keys_new_prompts_twice_on_a_terminal(tmp_path, monkeypatch, capsys):
    answers = iter(["a long passphrase here", "a long passphrase here"])
    monkeypatch.setattr(cli_keys, "_stdin_is_terminal", lambda: True)
    monkeypatch.setattr(cli_keys.getpass, "getpass", lambda _prompt: next(answers))
    code, out, _ = run(capsys, "keys", "new", tmp_path / "k")
    assert code == 0
    assert "key fingerprint:" in out


def test_keys_new_mismatched_prompts(tmp_path, monkeypatch, capsys):
    answers = iter(["first passphrase", "second passphrase"])
    monkeypatch.setattr(cli_keys, "_stdin_is_terminal", lambda: True)
    monkeypatch.setattr(cli_keys.getpass, "getpass", lambda _prompt: next(answers))
    code, _, err = run(capsys, "keys", "new", tmp_path / "k")
    assert code == 1
    one_line_error(err, "differ", "nothing was written")
    assert not (tmp_path / "k").exists()


def test_keys_new_no_passphrase_warns(tmp_path, capsys):
    code, _, err = run(capsys, "keys", "new", tmp_path, "--no-passphrase")
    assert code == 0
    assert "warning" in err
    assert "demo" in err


def test_keys_new_short_passphrase_warns(tmp_path, capsys):
    short = tmp_path / "short.txt"
    short.write_text("abc")
    code, _, err = run(capsys, "keys", "new", tmp_path / "k", "--passphrase-file", short)
    assert code == 0
    assert "shorter than 12" in err


@pytest.mark.parametrize("argv", [
    ["keys"],
    ["keys", "new"],
    ["keys", "new", "d", "--no-passphrase", "--passphrase-file", "p"],
    ["sign", "a.calc.json", "--key", "k.key"],
    ["sign", "a.calc.json", "-o", "b.calc.json"],
])
def test_usage_errors_exit_2(argv, capsys):
    code, _, err = run(capsys, *argv)
    assert code == 2
    assert "usage:" in err


def test_empty_passphrase_file(tmp_path, capsys):
    empty = tmp_path / "empty.txt"
    empty.write_text("\n")
    code, _, err = run(capsys, "keys", "new", tmp_path / "k", "--passphrase-file", empty)
    assert code == 1
    one_line_error(err, "empty.txt", "first line is empty")


# -- sign --------------------------------------------------------------------------------------

def test_sign(calc, keydir, passfile, tmp_path, capsys):
    out_path = tmp_path / "signed.calc.json"
    code, out, err = run(capsys, "sign", calc, "--key", keydir / "calcbuilder-signing.key",
                         "-o", out_path, "--passphrase-file", passfile)
    assert code == 0, err
    text = out_path.read_text(encoding="utf-8")
    assert text.endswith("}\n")
    assert "µmol/L" in text  # UTF-8, not escaped
    assert text.startswith('{\n  "format"')  # pretty-printed
    result = verify_document(read_json_file(out_path), None)
    assert result.state is TrustState.UNKNOWN_SIGNER
    public = load_public_key(keydir / "calcbuilder-signing.pub")
    assert f"file fingerprint: {fingerprint(DOCUMENT)}" in out
    assert f"key fingerprint:  {key_fingerprint(public)}" in out
    assert calc.read_text() == json.dumps(DOCUMENT)  # the input is untouched


def test_sign_then_trust_gives_verified(calc, keydir, passfile, tmp_path, capsys):
    out_path = tmp_path / "signed.calc.json"
    assert run(capsys, "sign", calc, "--key", keydir / "calcbuilder-signing.key", "-o",
               out_path, "--passphrase-file", passfile)[0] == 0
    code, out, _ = run(capsys, "keys", "trust", keydir / "calcbuilder-signing.pub",
                       "--name", "Demo statistics unit")
    assert code == 0
    assert "Trusted: Demo statistics unit" in out
    result = verify_document(read_json_file(out_path), TrustedKeys())
    assert result.state is TrustState.VERIFIED
    assert result.signer == "Demo statistics unit"


def test_resign_replaces_signature(calc, keydir, passfile, tmp_path, capsys):
    assert run(capsys, "keys", "new", tmp_path / "k2", "--no-passphrase")[0] == 0
    first = tmp_path / "a.calc.json"
    assert run(capsys, "sign", calc, "--key", keydir / "calcbuilder-signing.key", "-o", first,
               "--passphrase-file", passfile)[0] == 0
    code, out, err = run(capsys, "sign", first, "--key", tmp_path / "k2" /
                         "calcbuilder-signing.key", "-o", first, "--json")
    assert code == 0
    assert "warning" in err  # unencrypted demo key
    result = json.loads(out)
    document = read_json_file(first)
    assert document["signature"]["key_fingerprint"] == result["key_fingerprint"]
    assert verify_document(document, None).state is TrustState.UNKNOWN_SIGNER
    assert result["file_fingerprint"] == fingerprint(DOCUMENT)


def test_sign_wrong_passphrase(calc, keydir, tmp_path, capsys):
    wrong = tmp_path / "wrong.txt"
    wrong.write_text("not it\n")
    code, _, err = run(capsys, "sign", calc, "--key", keydir / "calcbuilder-signing.key",
                       "-o", tmp_path / "out.json", "--passphrase-file", wrong)
    assert code == 1
    one_line_error(err, "calcbuilder sign: error:", "wrong passphrase")
    assert not (tmp_path / "out.json").exists()


def test_sign_encrypted_key_without_terminal(calc, keydir, tmp_path, capsys):
    code, _, err = run(capsys, "sign", calc, "--key", keydir / "calcbuilder-signing.key",
                       "-o", tmp_path / "out.json")
    assert code == 1
    one_line_error(err, "--passphrase-file")


@pytest.mark.parametrize(("content", "words"), [
    ("[1, 2]", "must be a JSON object"),
    ("{not json", "not valid JSON"),
    ('{"format": "something-else"}', "format must be 'calcbuilder-calculator'"),
    ('{"format": "calcbuilder-calculator", "a": 1, "a": 2}', "appears twice"),
])
def test_sign_refuses_bad_input(content, words, keydir, passfile, capsys):
    bad = keydir.parent / "bad.calc.json"
    bad.write_text(content)
    code, _, err = run(capsys, "sign", bad, "--key", keydir / "calcbuilder-signing.key",
                       "-o", keydir.parent / "out.json", "--passphrase-file", passfile)
    assert code == 1
    one_line_error(err, words)
    assert not (keydir.parent / "out.json").exists()


def test_sign_lists_values_without_canonical_form(keydir, passfile, capsys):
    bad = keydir.parent / "big.calc.json"
    doc = json.loads(json.dumps(DOCUMENT))
    doc["about"]["seed"] = 9007199254740993
    bad.write_text(json.dumps(doc))
    code, _, err = run(capsys, "sign", bad, "--key", keydir / "calcbuilder-signing.key",
                       "-o", keydir.parent / "out.json", "--passphrase-file", passfile)
    assert code == 1
    first, problem = err.strip().splitlines()
    assert "big.calc.json: will not sign an invalid calculator file" in first
    assert "about.seed: integer 9007199254740993 is outside" in problem


def test_sign_asks_for_passphrase_on_a_terminal(calc, keydir, tmp_path, monkeypatch, capsys):
    monkeypatch.setattr(cli_keys, "_stdin_is_terminal", lambda: True)
    monkeypatch.setattr(cli_keys.getpass, "getpass",
                        lambda _prompt: "correct horse battery staple")
    code, _, err = run(capsys, "sign", calc, "--key", keydir / "calcbuilder-signing.key",
                       "-o", tmp_path / "out.json")
    assert code == 0, err
    assert verify_document(read_json_file(tmp_path / "out.json"), None).may_compute


def test_sign_with_public_key_by_mistake(calc, keydir, tmp_path, capsys):
    code, _, err = run(capsys, "sign", calc, "--key", keydir / "calcbuilder-signing.pub",
                       "-o", tmp_path / "out.json")
    assert code == 1
    one_line_error(err, "public key", ".key file")


def test_sign_missing_input(keydir, passfile, tmp_path, capsys):
    code, _, err = run(capsys, "sign", tmp_path / "nope.calc.json", "--key",
                       keydir / "calcbuilder-signing.key", "-o", tmp_path / "out.json",
                       "--passphrase-file", passfile)
    assert code == 1
    one_line_error(err, "nope.calc.json")


def test_sign_into_missing_folder(calc, keydir, passfile, tmp_path, capsys):
    code, _, err = run(capsys, "sign", calc, "--key", keydir / "calcbuilder-signing.key",
                       "-o", tmp_path / "no" / "out.json", "--passphrase-file", passfile)
    assert code == 1
    one_line_error(err, "folder does not exist")


# -- keys trust / list / untrust ---------------------------------------------------------------

def test_trust_list_untrust(keydir, tmp_path, capsys):
    pub = keydir / "calcbuilder-signing.pub"
    fp = key_fingerprint(load_public_key(pub))
    code, out, _ = run(capsys, "keys", "list")
    assert code == 0
    assert "No trusted signing keys" in out
    assert run(capsys, "keys", "trust", pub)[0] == 0  # label from the Name: line
    code, out, _ = run(capsys, "keys", "list", "--json")
    listed = json.loads(out)
    assert listed["directory"] == str(tmp_path / "config" / "trusted-keys")
    assert listed["keys"][0]["key_fingerprint"] == fp
    assert listed["keys"][0]["name"] == "calcbuilder-signing"
    code, out, _ = run(capsys, "keys", "list")
    assert f"{fp}  calcbuilder-signing" in out
    code, out, _ = run(capsys, "keys", "untrust", fp[:12])
    assert code == 0
    assert fp in out
    assert TrustedKeys().entries() == []


def test_trust_expect_fingerprint(keydir, capsys):
    pub = keydir / "calcbuilder-signing.pub"
    fp = key_fingerprint(load_public_key(pub))
    code, _, err = run(capsys, "keys", "trust", pub, "--expect-fingerprint", "ab" * 32)
    assert code == 1
    one_line_error(err, fp, "do not trust")
    assert TrustedKeys().entries() == []
    assert run(capsys, "keys", "trust", pub, "--expect-fingerprint", fp.upper())[0] == 0


def test_trust_bad_file(tmp_path, capsys):
    junk = tmp_path / "junk.pub"
    junk.write_text("hello")
    code, _, err = run(capsys, "keys", "trust", junk)
    assert code == 1
    one_line_error(err, "junk.pub", "not a PEM public key")


def test_untrust_unknown(capsys):
    code, _, err = run(capsys, "keys", "untrust", "deadbeefdeadbeef")
    assert code == 1
    one_line_error(err, "no trusted key matches")


def test_list_reports_broken_files(keydir, tmp_path, capsys):
    assert run(capsys, "keys", "trust", keydir / "calcbuilder-signing.pub")[0] == 0
    (tmp_path / "config" / "trusted-keys" / "broken.pub").write_text("x")
    code, out, err = run(capsys, "keys", "list")
    assert code == 0
    assert "calcbuilder-signing" in out
    assert "broken.pub" in err
