"""Errors that reach the user as one clear line.

Every mistake in the user's input (a missing file, an unreadable file, a missing
column, a bad date, a bad option) is raised as :class:`InputError`, which names the
file (or the argument) and what is wrong. The command line prints ``str(err)`` and
exits with status 2; it never shows a traceback for these.
"""
from __future__ import annotations


class InputError(ValueError):
    """A problem with the user's input, reported in one line.

    Parameters
    ----------
    source : str
        The file path or argument name the problem is in (``"chain.csv"``,
        ``"--beta"``).
    problem : str
        What is wrong, in plain words ("missing column 'strike'").
    """

    def __init__(self, source: object, problem: str) -> None:
        self.source = str(source)
        self.problem = problem
        super().__init__(f"{self.source}: {problem}")


class ModelWarning(UserWarning):
    """A model estimate that needs the user's attention (non-convergence, fallback)."""
