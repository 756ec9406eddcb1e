"""The ``podwatch`` command line: argument parsing and plain-text output only.

Rules: may use every layer; nothing imports it. The live commands import
the receiver and the page only when they run, so the offline commands
start quickly.
"""

from receiver.cli.program import main

__all__ = ["main"]
