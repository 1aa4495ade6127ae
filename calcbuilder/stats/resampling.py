"""Placeholder: being written (see DEVELOPERS.md)."""

__all__: list[str] = []
