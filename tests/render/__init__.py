"""Rendering tests. This file makes the folder a package so that its conftest.py is imported
as ``render.conftest`` and does not shadow the module ``conftest`` (tests/conftest.py) that
other test modules import names from."""
