"""What every ``hubnet`` command shares: the error console and the failure exit."""

from __future__ import annotations

from typing import NoReturn

import typer
from rich.console import Console
from rich.markup import escape

from hubnet.errors import EXIT_ERROR, HubnetError

#: Messages and progress go to standard error; stdout stays free for data.
err_console = Console(stderr=True, highlight=False, soft_wrap=True)


def fail(err: BaseException, verbose: bool) -> NoReturn:
    """Print one line for ``err`` (a traceback too with ``verbose``) and exit with its code."""
    if verbose:
        err_console.print_exception()
    code = err.exit_code if isinstance(err, HubnetError) else EXIT_ERROR
    # escape: messages name config sections such as [inputs], which are not markup
    err_console.print(f"[bold red]error:[/bold red] {escape(str(err))}", highlight=False)
    raise typer.Exit(code)
