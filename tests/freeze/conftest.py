"""Fixtures of this folder; the helpers live in freeze_support.py (a unique module name: two
folders' ``conftest`` modules would shadow each other when test files import them)."""

from freeze_support import record, signal  # noqa: F401
