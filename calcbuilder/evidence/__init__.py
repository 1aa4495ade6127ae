"""Authoring: recipes, data files and the checks made before a model is fitted.

* :func:`load_recipe` / :class:`Recipe` — the fitting recipe (TOML; ``docs/recipe.md``).
* :func:`read_table` / :func:`file_sha256` — CSV, Parquet and Excel data files.
* :func:`prepare` / :class:`Prepared` — the data checked against a recipe and
  ready for fitting, with counts, sample-size adequacy and warnings.

Errors: :class:`RecipeError` and :class:`DataError`, each listing every problem found.
"""

from .datacheck import DataSummary, Prepared, ResolvedTerm, SampleSizeCheck, prepare
from .dataset import file_sha256, read_table
from .errors import DataError, RecipeError
from .recipe import InputEntry, PlannedTerm, Recipe, load_recipe

__all__ = [
    "DataError",
    "DataSummary",
    "InputEntry",
    "PlannedTerm",
    "Prepared",
    "Recipe",
    "RecipeError",
    "ResolvedTerm",
    "SampleSizeCheck",
    "file_sha256",
    "load_recipe",
    "prepare",
    "read_table",
]
