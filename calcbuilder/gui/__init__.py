"""The clinic form: PySide6 views over :class:`calcbuilder.clinic.session.ClinicSession`.

Views only: every number, message and sentence shown comes from the session
(and the threshold and benefit objects next to it); the widgets display it and
write edits back. Importing this package imports nothing; the form itself is
:class:`calcbuilder.gui.app.ClinicWindow`, started by :func:`calcbuilder.gui.app.main`.

Start-up rules (tested in ``tests/gui/test_startup.py``): the form's import path
loads no pandas, statsmodels or scipy, and matplotlib is imported only when a
figure is first drawn.
"""

__all__: list[str] = []
