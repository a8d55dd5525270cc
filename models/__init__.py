"""Lagwise computation layer: diary data, model specification, estimation, fit tests, files.

Pure computation: nothing here imports Qt or the desktop package (an import-linter
contract in pyproject.toml and tests/test_layers.py check it).
"""
