"""Helpers and a pytest plugin for plugin authors (conformance suites).

Loaded by pytest through the ``pytest11`` entry point; it only adds fixtures
and helpers, never changes a test run by itself.
"""
from __future__ import annotations
