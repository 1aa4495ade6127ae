"""PMML reading helpers (private): child elements, numbers, fields and derived fields.

Elements of the PMML 4.x standard relied on here (Data Mining Group; the
structure is recalled from memory of the standard, not copied from it):

* ``DataDictionary/DataField`` (``name``, ``optype``; ``Value`` children with
  ``property`` valid/invalid/missing, ``Interval`` children ignored);
* ``TransformationDictionary`` and ``LocalTransformations`` holding
  ``DerivedField`` elements whose expression is an ``Apply`` of a built-in
  function to ``FieldRef`` and ``Constant`` arguments (built-ins ``ln``, ``sqrt``,
  ``+`` and ``-``);
* ``MiningSchema/MiningField`` (``name``, ``usageType``, ``outliers``).

Supported derived fields, the simplest that map onto calculator transforms:
``ln(x)``, ``ln(x + c)``, ``ln(x - c)`` (``log`` with shift c or -c) and
``sqrt(x)``, each of one DataField. Every other expression is refused.
"""

from __future__ import annotations

import math
import re
from collections.abc import Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any
from xml.etree.ElementTree import Element

from ..problems import Problems
from ._pmml_terms import FieldInfo

__all__ = ["IGNORED", "Reader", "data_dictionary", "derived_fields", "mining_schema"]

IGNORED = ("Extension", "Output", "ModelStats", "ModelExplanation", "ModelVerification")
"""Elements skipped wherever they appear: they describe a model but do not change its scores."""

_NUMBER = re.compile(r"[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?")
_USAGE = ("active", "predicted", "target", "supplementary", "frequencyWeight", "analysisWeight")


@dataclass
class Reader:
    """Walks one PMML document, recording every problem with the element named."""

    source: str
    ns: str
    problems: Problems = field(default_factory=Problems)

    def tag(self, el: Element) -> str:
        """The local name of an element of the document's namespace, else ``{ns}name``."""
        text = str(el.tag)
        prefix = "{" + self.ns + "}"
        return text[len(prefix):] if text.startswith(prefix) else text

    def children(self, el: Element, where: str, allowed: Sequence[str]
                 ) -> Iterator[tuple[str, Element]]:
        """Allowed children with their local names; ignored ones skipped, others refused."""
        for child in el:
            if not isinstance(child.tag, str):
                continue  # comments and processing instructions
            tag = self.tag(child)
            if tag in IGNORED:
                continue
            if tag not in allowed:
                supported = ", ".join(allowed) if allowed else "no child elements"
                self.problems.add(where, f"element <{tag}> is not supported here "
                                  f"(supported: {supported})")
                continue
            yield tag, child

    def number(self, el: Element, attr: str, where: str,
               default: float | None = None) -> float | None:
        """A finite number attribute; required when ``default`` is None."""
        text = el.get(attr)
        if text is None:
            if default is None:
                self.problems.add(where, f"attribute {attr} is required")
            return default
        value = float(text) if _NUMBER.fullmatch(text.strip()) else math.nan
        if not math.isfinite(value):
            self.problems.add(where, f"{attr}={text!r} is not a finite number")
            return None
        return value

    def require(self, el: Element, attr: str, where: str, allowed: Sequence[str],
                default: str | None = None) -> str | None:
        """An attribute that must take one of ``allowed`` values (message names it)."""
        value = el.get(attr, default)
        if value not in allowed:
            want = " or ".join(f'{attr}="{a}"' for a in allowed)
            got = f'{attr}="{value}"' if value is not None else f"no {attr}"
            self.problems.add(where, f"{got} is not supported; calcbuilder imports {want}")
            return None
        return value

    def refuse_attributes(self, el: Element, where: str, names: Sequence[str]) -> None:
        """Attributes that would change the scores in ways the calculator cannot follow."""
        for name in names:
            if el.get(name) is not None:
                self.problems.add(where, f"attribute {name}={el.get(name)!r} is not supported")


def data_dictionary(r: Reader, el: Element) -> dict[str, FieldInfo]:
    """The DataFields by name."""
    fields: dict[str, FieldInfo] = {}
    for _, child in r.children(el, "DataDictionary", ("DataField",)):
        name = child.get("name") or ""
        where = f"DataField {name!r}"
        if not name:
            r.problems.add("DataDictionary", "a DataField without a name")
            continue
        if name in fields:
            r.problems.add(where, "defined twice")
        values = tuple(str(v.get("value")) for tag, v in
                       r.children(child, where, ("Value", "Interval"))
                       if tag == "Value" and v.get("property", "valid") == "valid")
        fields[name] = FieldInfo(name, child.get("optype", ""), values)
    return fields


def derived_fields(r: Reader, el: Element, where: str, fields: dict[str, FieldInfo]) -> None:
    """Add the DerivedFields of a TransformationDictionary or LocalTransformations."""
    for _, child in r.children(el, where, ("DerivedField",)):
        name = child.get("name") or ""
        at = f"DerivedField {name!r}"
        if not name or name in fields:
            r.problems.add(at, "needs a name of its own (not empty, not another field's)")
            continue
        info = _derived(r, child, at, fields)
        if info is not None:
            fields[name] = info


def _derived(r: Reader, el: Element, at: str, fields: Mapping[str, FieldInfo]
             ) -> FieldInfo | None:
    exprs = list(r.children(el, at, ("Apply",)))
    if len(exprs) != 1:
        if not exprs:
            r.problems.add(at, "needs one Apply expression (ln or sqrt of a field)")
        return None
    apply = exprs[0][1]
    fn = apply.get("function")
    args = list(r.children(apply, f"{at}/Apply", ("FieldRef", "Apply", "Constant")))
    r.refuse_attributes(apply, f"{at}/Apply", ("mapMissingTo", "defaultValue"))
    transform: dict[str, Any] | None = None
    base = None
    if fn in ("ln", "sqrt") and len(args) == 1 and args[0][0] == "FieldRef":
        base = _field_ref(r, args[0][1], at, fields)
        transform = {"type": "log", "shift": 0.0} if fn == "ln" else {"type": "sqrt"}
    elif fn == "ln" and len(args) == 1 and args[0][0] == "Apply":
        base, shift = _sum(r, args[0][1], at, fields)
        transform = None if shift is None else {"type": "log", "shift": shift}
    else:
        r.problems.add(at, f"the expression Apply function={fn!r} is not supported; derived "
                       "fields may be ln(x), ln(x + c), ln(x - c) or sqrt(x) of one DataField")
        return None
    if base is None or transform is None:
        return None
    return FieldInfo(el.get("name") or "", "continuous", (), base, transform)


def _sum(r: Reader, apply: Element, at: str, fields: Mapping[str, FieldInfo]
         ) -> tuple[str | None, float | None]:
    fn = apply.get("function")
    args = list(r.children(apply, f"{at}/Apply/Apply", ("FieldRef", "Constant")))
    r.refuse_attributes(apply, f"{at}/Apply/Apply", ("mapMissingTo", "defaultValue"))
    kinds = [tag for tag, _ in args]
    ok = (fn == "+" and sorted(kinds) == ["Constant", "FieldRef"]) or (
        fn == "-" and kinds == ["FieldRef", "Constant"])
    if not ok:
        r.problems.add(at, f"inside ln(...) only x + c, c + x or x - c of one DataField x and a "
                       f"Constant c are supported (got Apply function={fn!r} of "
                       f"{', '.join(kinds) or 'nothing'})")
        return None, None
    ref = next(el for tag, el in args if tag == "FieldRef")
    const = next(el for tag, el in args if tag == "Constant")
    text = (const.text or "").strip()
    c = float(text) if _NUMBER.fullmatch(text) else math.nan
    if not math.isfinite(c) or const.get("missing") == "true":
        r.problems.add(at, f"Constant {const.text!r} is not a finite number")
        return None, None
    return _field_ref(r, ref, at, fields), (c if fn == "+" else -c)


def _field_ref(r: Reader, ref: Element, at: str, fields: Mapping[str, FieldInfo]) -> str | None:
    name = ref.get("field") or ""
    r.refuse_attributes(ref, f"{at}/FieldRef", ("mapMissingTo",))
    info = fields.get(name)
    if info is None or info.base:
        r.problems.add(at, f"FieldRef field={name!r} must name a DataField")
        return None
    return name


def mining_schema(r: Reader, model: Element, where: str, fields: Mapping[str, FieldInfo]
                  ) -> tuple[str | None, set[str]]:
    """The target field and the active fields of a model's MiningSchema.

    ``missingValueReplacement`` / ``invalidValueTreatment`` are not read: the
    calculator never scores a missing value, and its inputs' hard limits refuse
    impossible ones. ``outliers`` other than ``asIs`` would change values and is refused.
    """
    schemas = [el for el in model if isinstance(el.tag, str) and r.tag(el) == "MiningSchema"]
    if len(schemas) != 1:
        r.problems.add(where, f"needs exactly one MiningSchema (got {len(schemas)})")
        return None, set()
    targets, active = [], set()
    for _, mf in r.children(schemas[0], f"{where}/MiningSchema", ("MiningField",)):
        name = mf.get("name") or ""
        at = f"MiningField {name!r}"
        if name not in fields:
            r.problems.add(at, "names no DataField")
        usage = r.require(mf, "usageType", at, _USAGE, default="active")
        r.require(mf, "outliers", at, ("asIs",), default="asIs")
        if usage in ("predicted", "target"):
            targets.append(name)
        elif usage == "active":
            active.add(name)
    if len(targets) != 1:
        r.problems.add(f"{where}/MiningSchema", "needs exactly one target field (usageType "
                       f"predicted or target); got {len(targets)}")
        return None, active
    return targets[0], active
