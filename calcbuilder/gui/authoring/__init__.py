"""The authoring workspace: thin PySide6 views over :mod:`calcbuilder.authoring`.

One module per page (``data_page``, ``inputs_page`` with ``input_card``,
``assess_page`` with ``assess_plots``, ``about_page``, ``decision_page``,
``publish_page``), the window with its step list (``window``), the worker
thread (``worker``), dialogs and shared widgets. No statistics live here: the
pages show what the state objects and the pipeline produce. Start it with
:func:`calcbuilder.gui.authoring.app.run_workspace` (``calcbuilder author``).
"""

__all__: list[str] = []
