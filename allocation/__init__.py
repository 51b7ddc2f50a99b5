"""Baton: a web workbench for human-automation task allocation."""

__version__ = "0.1.0"
