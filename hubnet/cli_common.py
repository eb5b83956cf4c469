"""What every ``hubnet`` command shares: the error console, the failure exit, on/off switches."""

from __future__ import annotations

from typing import Any, NoReturn

import typer
from rich.console import Console
from rich.markup import escape

from hubnet.errors import EXIT_ERROR, HubnetError

#: Messages and progress go to standard error; stdout stays free for data.
err_console = Console(stderr=True, highlight=False, soft_wrap=True)


def switch(*names: str, help: str | None = None) -> Any:  # noqa: A002 (typer's name)
    """A ``typer.Option`` for an on/off switch (``--force``, ``-v``...).

    It shows no value type in ``--help``: typer would print ``<bool>``
    beside it, which reads as if the switch took a value.
    """
    return typer.Option(*names, help=help, metavar="")


def fail(err: BaseException, verbose: bool) -> NoReturn:
    """Print one line for ``err`` (a traceback too with ``verbose``) and exit with its code."""
    if verbose:
        err_console.print_exception()
    code = err.exit_code if isinstance(err, HubnetError) else EXIT_ERROR
    # escape: messages name config sections such as [inputs], which are not markup
    err_console.print(f"[bold red]error:[/bold red] {escape(str(err))}", highlight=False)
    raise typer.Exit(code)
