"""Shared fixtures of the statistics tests."""

import pytest
from sklearn.datasets import load_breast_cancer


@pytest.fixture(scope="module")
def cancer():
    """sklearn load_breast_cancer; event = malignant (target 0); features rescaled to [0, 1]."""
    data = load_breast_cancer()
    X = data.data
    X = (X - X.min(axis=0)) / (X.max(axis=0) - X.min(axis=0))
    return 1.0 - data.target, X
