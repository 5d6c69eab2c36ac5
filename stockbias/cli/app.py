"""The `stockbias` command: one typer app, one module per command group.

Every error leaves as one line on stderr and an exit code (DESIGN §3):
0 done, 1 a valid job that cannot be met, 2 bad input (also typer's own
usage errors).  No traceback reaches the user for an error they caused.
"""

from __future__ import annotations

import sys
from collections.abc import Sequence
from typing import Any

import typer
from typer.core import TyperGroup

try:  # typer >= 0.29 carries its own copy of click
    from typer._click.exceptions import ClickException, UsageError
except ImportError:  # pragma: no cover - older typer depends on click
    from click.exceptions import ClickException, UsageError  # type: ignore[no-redef]

from ..errors import StockbiasError, StockFileError


def _flatten(message: str) -> str:
    return " ".join(part.strip() for part in message.splitlines() if part.strip())


class _OneLineErrors(TyperGroup):
    """A command group whose errors are always one line and an exit code."""

    def main(self, args: Sequence[str] | None = None, prog_name: str | None = None,
             complete_var: str | None = None, standalone_mode: bool = True,
             windows_expand_args: bool = True, **extra: Any) -> Any:
        try:
            rv = super().main(args=args, prog_name=prog_name, complete_var=complete_var,
                              standalone_mode=False, windows_expand_args=windows_expand_args,
                              **extra)
        except UsageError as exc:
            where = f" ({exc.ctx.command_path})" if exc.ctx is not None else ""
            typer.echo(f"stockbias: usage error{where}: {_flatten(exc.format_message())}",
                       err=True)
            sys.exit(2)
        except StockFileError as exc:
            for line in exc.lines():
                typer.echo(line, err=True)
            sys.exit(exc.exit_code)
        except StockbiasError as exc:
            typer.echo(exc.one_line(), err=True)
            sys.exit(exc.exit_code)
        except ClickException as exc:
            typer.echo(f"stockbias: {_flatten(exc.format_message())}", err=True)
            sys.exit(exc.exit_code)
        except typer.Abort:
            typer.echo("stockbias: aborted", err=True)
            sys.exit(130)
        code = rv if isinstance(rv, int) else 0
        if standalone_mode:
            sys.exit(code)
        return code


app = typer.Typer(
    cls=_OneLineErrors,
    name="stockbias",
    help="Bias bipolar transistor stages with the parts on your shelf.",
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
)


def _register() -> None:
    from . import (
        check_cmd,
        consolidate_cmd,
        demo_cmd,
        design_cmd,
        export_cmd,
        stock_cmd,
        substitute_cmd,
    )

    app.command("demo")(demo_cmd.demo)
    app.command("check")(check_cmd.check)
    app.command("design")(design_cmd.design)
    app.command("substitute")(substitute_cmd.substitute)
    app.command("consolidate")(consolidate_cmd.consolidate)
    app.command("export")(export_cmd.export)
    app.add_typer(stock_cmd.app, name="stock")


_register()


def main() -> None:
    """Console-script entry point."""
    app()
