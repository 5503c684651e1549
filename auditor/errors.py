"""User-facing errors and named warnings.

Errors are for problems the user can fix (a file, a column, an option): the command line prints
their message on one line and exits 1. Data conditions that leave an index undefined (a constant
group, too few values) are *not* errors: the index becomes null with a reason, and a named warning
is issued so that library users can catch it.
"""

from __future__ import annotations


class AuditError(Exception):
    """A problem with the data, the file or the options that the user can fix (exit status 1)."""


class InputFileError(AuditError, OSError):
    """The data file is missing, unreadable or not a table."""


class ColumnError(AuditError, KeyError):
    """A named column does not exist in the file."""

    def __str__(self) -> str:  # KeyError would otherwise quote the message
        return str(self.args[0]) if self.args else ""


class DesignError(AuditError, ValueError):
    """The data do not form the requested design (too few groups, too few values, ...)."""


class AuditWarning(UserWarning):
    """Base class of every warning the audit issues."""


class UndefinedEffectWarning(AuditWarning):
    """An effect size or interval is undefined for these data and is reported as null."""


class ApproximationWarning(AuditWarning):
    """An exact method was replaced by an approximation; the output says which."""
