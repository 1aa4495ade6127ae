"""Importers: build a calculator from a model that already exists.

An author rarely starts from nothing. Each importer reads a model source,
combines it with an inputs description (TOML: about, inputs, decision,
cautions, test vectors; :mod:`.inputs_toml`), returns a calculator document
(FORMAT.md) and validates it with :meth:`Calculator.from_dict`, which re-scores
the test vectors: a mis-mapped term is refused, never written.

* :func:`import_table`: a coefficient table (CSV) -- :mod:`.table`;
* :func:`import_pmml`: a PMML 4.x RegressionModel or GeneralRegressionModel -- :mod:`.pmml`;
* :func:`import_fitted`: a fitted statsmodels logistic regression -- :mod:`.fitted`.

Everything outside the supported subsets is refused with a message naming the
element, term or row (:class:`ModelImportError`). Formats and examples:
``docs/importing.md``. statsmodels, patsy and pandas are imported only inside
the functions that read a fitted result.
"""

from __future__ import annotations

from ._common import ModelImportError, write_calculator
from .fitted import fitted_document, import_fitted
from .inputs_toml import InputsDescription, TermEntry, load_description, parse_description
from .pmml import import_pmml, parse_pmml, pmml_document, read_pmml
from .table import (
    CoefficientRow,
    import_table,
    parse_coefficient_table,
    read_coefficient_table,
    table_document,
)

__all__ = [
    "CoefficientRow",
    "InputsDescription",
    "ModelImportError",
    "TermEntry",
    "fitted_document",
    "import_fitted",
    "import_pmml",
    "import_table",
    "load_description",
    "parse_coefficient_table",
    "parse_description",
    "parse_pmml",
    "pmml_document",
    "read_coefficient_table",
    "read_pmml",
    "table_document",
    "write_calculator",
]
