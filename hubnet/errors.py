"""Exceptions raised by hubnet, and the exit codes the command line maps them to.

Every error a user can cause derives from :class:`HubnetError`, so a caller
(a notebook, a scheduler wrapper, the CLI) can catch one class.
"""

from __future__ import annotations

from dataclasses import dataclass

#: Exit codes of the ``hubnet`` command, documented in the README.
EXIT_OK = 0
EXIT_ERROR = 1  # unexpected failure (a bug, a solver crash, a disk error)
EXIT_BAD_INPUT = 2  # inputs or config failed validation; nothing was written
EXIT_INFEASIBLE = 3  # the model has no feasible plan
EXIT_NO_SOLUTION = 4  # the time limit ran out before any plan was found
EXIT_OUTPUT_EXISTS = 5  # the run folder exists and --force was not given


@dataclass(frozen=True, slots=True)
class Problem:
    """One problem found in an input file.

    Attributes
    ----------
    file
        The file: a data file relative to the working folder (absolute
        when outside it, see :func:`hubnet.inputs.shown_path`); a config or
        sweep file as the user gave it.
    row
        The row as the user sees it: for CSV and Excel the spreadsheet row,
        with the header on row 1 and the first data row on row 2; for TOML
        the line number when known. ``None`` when the problem is not tied
        to a row (a missing column, a missing file).
    column
        The column (or, in a TOML file, the key) concerned, or ``None``;
        shown as "column" or "key".
    message
        A plain sentence saying what is wrong and what was expected.
    """

    file: str
    row: int | None
    column: str | None
    message: str

    def __str__(self) -> str:
        where = self.file
        toml = self.file.endswith(".toml")
        if self.row is not None:
            where += f" {'line' if toml else 'row'} {self.row}"
        if self.column is not None:
            where += f", {'key' if toml else 'column'} {self.column}"
        return f"{where}: {self.message}"


class HubnetError(Exception):
    """Base class of every error hubnet raises on purpose."""

    exit_code: int = EXIT_ERROR


class InputError(HubnetError, ValueError):
    """Inputs or config failed validation.

    Carries every problem found, not just the first, so a user can fix a
    file in one pass.
    """

    exit_code = EXIT_BAD_INPUT

    def __init__(self, problems: list[Problem] | Problem | str):
        if isinstance(problems, str):
            problems = [Problem("input", None, None, problems)]
        elif isinstance(problems, Problem):
            problems = [problems]
        self.problems: list[Problem] = list(problems)
        count = len(self.problems)
        head = f"{count} problem{'s' if count != 1 else ''} in the input"
        super().__init__(head + ":\n" + "\n".join(f"  {p}" for p in self.problems))


class InfeasibleError(HubnetError):
    """The model has no feasible plan (for example capacity below demand)."""

    exit_code = EXIT_INFEASIBLE


class NoSolutionError(HubnetError):
    """The solver stopped (time limit) before finding any feasible plan."""

    exit_code = EXIT_NO_SOLUTION


class SolverError(HubnetError):
    """The solver is unavailable or failed in an unexpected way."""

    exit_code = EXIT_ERROR


class OutputExistsError(HubnetError, FileExistsError):
    """The run folder already exists and overwriting was not asked for."""

    exit_code = EXIT_OUTPUT_EXISTS
