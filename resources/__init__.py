"""Bundled files: the invented demo diary (demo/) and the project-format description.

Installed as `lagwise.resources`; code finds the files with
``importlib.resources.files("lagwise.resources")``, so they work from a wheel too.
"""
