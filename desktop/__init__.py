"""Lagwise desktop: the command line and the Qt window. It shows and edits; models/ computes."""
