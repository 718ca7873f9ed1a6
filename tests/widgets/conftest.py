"""Fixtures of this folder; the helpers live in widget_support.py (a unique module name: two
folders' ``conftest`` modules would shadow each other when test files import them)."""

from widget_support import bench, big_sig, sig  # noqa: F401
