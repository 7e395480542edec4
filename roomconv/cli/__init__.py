"""The ``roomconv`` command line: one module per command group, each parsing its options,
calling a job from :mod:`roomconv.jobs` and presenting the result.

Errors from :mod:`roomconv.errors` become a one-line message and exit code 2 (bad input) or
1 (internal); ``--debug`` shows tracebacks.
"""

from .common import Parser, device_spec
from .entry import build_parser, command_groups, main

__all__ = ["main", "build_parser", "command_groups", "Parser", "device_spec"]
