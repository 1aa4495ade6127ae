"""Printed documents (reportlab): the one-page risk sheet.

reportlab is imported only when a document is built, never at start-up.
"""

__all__: list[str] = []
