"""Command line: one thin module per command family over the Python API.

``main`` holds the ``textkit`` group and the table of commands, each loaded
from its module (``coding``, ``stats``, ``discover``) only when used, so that
``textkit --help`` imports click and nothing heavy. Every command parses
options, calls public functions and prints a short summary; a
:class:`~textkit.errors.TextkitError` becomes one line on stderr and exit 2.
"""

from .main import cli, main

__all__ = ["cli", "main"]
