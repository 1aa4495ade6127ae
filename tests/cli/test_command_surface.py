"""The fixed command names and options (outside checks call them): each answers --help."""

import pytest

from calcbuilder.cli import main

COMMANDS = {
    ("check",): ["--trust"],
    ("keys", "new"): ["--passphrase-file", "--no-passphrase"],
    ("sign",): ["--key", "-o"],
    ("import", "table"): ["--inputs", "-o"],
    ("import", "pmml"): ["--inputs", "-o"],
    ("import", "evidence"): ["-o"],
    ("score",): ["-o"],
    ("fit",): ["--recipe", "-o", "--complete-case"],
    ("assess",): ["--data", "--outcome", "--bootstrap", "--seed", "--external", "--label",
                  "--predictions", "-o"],
    ("recalibrate",): ["--data", "--method", "-o"],
    ("compare",): ["--data", "--cuts", "--json"],
    ("report",): ["-o"],
    ("form",): ["--value", "--screenshot"],
    ("sheet",): ["--value", "--unit", "--threshold", "--patient-ref", "-o"],
    ("demo",): ["--out", "--no-window"],
    ("author",): [],
}


@pytest.mark.parametrize("words", sorted(COMMANDS), ids=" ".join)
def test_command_answers_help_with_its_fixed_options(words, capsys):
    assert main([*words, "--help"]) == 0
    out = capsys.readouterr().out
    for option in COMMANDS[words]:
        assert option in out


def test_unknown_command_is_a_usage_error(capsys):
    assert main(["no-such-command"]) == 2
