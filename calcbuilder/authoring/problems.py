"""Route the pipeline's problems to the fields they are about.

The recipe, the data checks and the importers report every problem at once as
``"key.path: message"`` (:class:`calcbuilder.evidence.RecipeError`,
:class:`calcbuilder.calc.importers.ModelImportError`). The workspace shows each
message beside its field: a view registers one *field key* per field (a key
path such as ``about.title`` or ``inputs[#2].limits``), and :func:`route` gives
each problem to the registered key that is the longest prefix of its path.
Problems no field claims are kept under ``""`` -- shown at the top of the
step -- so nothing is ever dropped.

Input entries are named by position in field keys (``inputs[#1]`` is the first
input): the recipe names an entry by its id when the id is usable
(``inputs[age]``) and by position otherwise (``inputs[#3]``); the calculator
file's and the importers' messages count positions from 0 (``inputs[2]``).
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

__all__ = ["FieldProblem", "entry_key", "normalise_path", "route", "split_problem"]

_PATH = re.compile(r"[A-Za-z_$][\w$.\[\]#\-]*")
_ENTRY = re.compile(r"^inputs\[([^\]]+)\]")


@dataclass(frozen=True)
class FieldProblem:
    """One problem: where (a normalised key path, ``""`` when none) and what."""

    path: str
    message: str


def entry_key(index: int) -> str:
    """The field-key prefix of the input entry at ``index`` (from 0): ``inputs[#index+1]``."""
    return f"inputs[#{index + 1}]"


def split_problem(text: str) -> tuple[str, str]:
    """``"about.title: must be ..."`` -> ``("about.title", "must be ...")``; a text with
    no leading key path -> ``("", text)``."""
    head, sep, tail = text.partition(": ")
    if sep and _PATH.fullmatch(head.strip()):
        return head.strip(), tail.strip()
    return "", text.strip()


def normalise_path(path: str, ids: Sequence[str]) -> str:
    """Name input entries by position from 1 (``inputs[age]`` / ``inputs[2]`` -> ``inputs[#k]``)."""
    found = _ENTRY.match(path)
    if not found:
        return path
    inner = found.group(1)
    if inner.startswith("#"):
        return path
    if inner.isdigit():
        index = int(inner)
    elif inner in ids:
        index = list(ids).index(inner)
    else:
        return path
    return entry_key(index) + path[found.end():]


def _claims(key: str, path: str) -> bool:
    return path == key or path.startswith((key + ".", key + "["))


def route(problems: Iterable[str], keys: Iterable[str], ids: Sequence[str] = ()
          ) -> dict[str, list[str]]:
    """Each problem under the field key that claims it (longest prefix), others under ``""``.

    Parameters
    ----------
    problems : iterable of str
        ``"key.path: message"`` texts (or plain texts).
    keys : iterable of str
        The field keys a view shows messages for.
    ids : sequence of str
        The input ids in entry order, to name entries by position.

    Returns
    -------
    dict
        Field key -> messages, in the order the problems came. A message keeps the
        part of its path below the field key (``low: must be below ...``) so a field
        covering several values says which one.
    """
    ordered = sorted(set(keys), key=len, reverse=True)
    out: dict[str, list[str]] = {}
    for text in problems:
        path, message = split_problem(text)
        path = normalise_path(path, ids)
        owner = next((k for k in ordered if k and _claims(k, path)), "")
        if owner:
            rest = path[len(owner):].lstrip(".")
            shown = f"{rest}: {message}" if rest else message
        else:
            shown = f"{path}: {message}" if path else message
        out.setdefault(owner, []).append(shown)
    return out
