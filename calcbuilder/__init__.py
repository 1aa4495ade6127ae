"""calcbuilder: publish validated clinical risk-prediction models as signed calculators.

Layers (dependencies point down this list): ``stats`` (pure numpy/scipy),
``calc`` (the calculator file), ``evidence``, ``plots``, ``reports``, ``gui``,
``cli``. See DEVELOPERS.md.
"""

__version__ = "0.1.0"
