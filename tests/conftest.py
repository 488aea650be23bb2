"""Shared test set-up.

This file puts ``tests/`` on ``sys.path`` (pytest's default ``prepend`` import mode inserts each
conftest's folder), so every test module, ``tests/ui`` included, can ``from polling import ...``.
"""
