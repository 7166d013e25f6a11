"""The command line: every click command and shared option, and nothing else.

Commands are thin: they parse options (in the profile's unit), call the
stage that does the work, and print.  `main` is the console script `saglog`.
"""

from logger.cli.main import main

__all__ = ["main"]
