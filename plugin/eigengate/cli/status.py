"""The command line's exit statuses and its one-line errors."""

from __future__ import annotations

import enum

__all__ = ["Exit", "UsageError", "OutputError", "CLOSED_PIPE"]


class Exit(enum.IntEnum):
    CLEAN = 0
    FINDINGS = 1
    USAGE = 2


class UsageError(Exception):
    """A command-line mistake: printed as one line, exit status 2."""


class OutputError(UsageError):
    """A report that cannot be written (folder missing or outside the repository, no
    permission, disk full): one line, exit status 2."""


#: Exit status when standard output is closed by its reader (``| head``): what a shell
#: reports for a program stopped by SIGPIPE (128 + 13); never 0, as the report was cut off.
CLOSED_PIPE = 141


#: Exit status when standard output is closed by its reader (``| head``): what a shell
#: reports for a program stopped by SIGPIPE (128 + 13); never 0, as the report was cut off.
CLOSED_PIPE = 141
