"""The `stockbias` command: one typer app, one module per command group.

Every run ends in one of these exit codes, with at most one line on stderr
for anything but success (DESIGN §3):

* 0 done (a check that passes);
* 1 a valid job that cannot be met (no feasible design, a failing check);
* 2 bad input, also typer's own usage errors; ``stockbias`` alone prints the
  help and exits 2 (no command given);
* 3 internal error: an exception nobody anticipated.  One line names it and
  the file in the system temporary folder that holds the full report;
* 130 interrupted (Ctrl-C): no output file is written.

No traceback reaches the user.
"""

from __future__ import annotations

import contextlib
import sys
from collections.abc import Sequence
from typing import Annotated, Any

import typer
from typer.core import TyperGroup

try:  # typer >= 0.29 carries its own copy of click
    from typer._click.exceptions import ClickException, NoArgsIsHelpError, UsageError
except ImportError:  # pragma: no cover - older typer depends on click
    from click.exceptions import (  # type: ignore[no-redef]
        ClickException,
        NoArgsIsHelpError,
        UsageError,
    )

from .. import __version__
from ..errors import StockbiasError, StockFileError, printable
from .failsafe import (
    EXIT_BAD_INPUT,
    EXIT_DONE,
    EXIT_INTERNAL,
    EXIT_INTERRUPTED,
    interrupt_handled,
    output_closed,
    watch_interrupts,
    write_crash_report,
)


def _flatten(message: str) -> str:
    return printable(" ".join(part.strip() for part in message.splitlines() if part.strip()))


def _interrupted() -> None:
    interrupt_handled.set()
    _say("stockbias: interrupted")
    sys.exit(EXIT_INTERRUPTED)


def _say(line: str) -> None:
    """One line on stderr; a closed stderr has nobody to tell, and the exit code stands."""
    with contextlib.suppress(BrokenPipeError):
        typer.echo(line, err=True)


class _Command(typer.core.TyperCommand):
    """A command whose usage line names its arguments as ``JOB_FILE``, ``[FILE]``...

    typer draws a required argument as ``{job_file}``; the braces read as
    shell syntax, so each argument is its metavar (or upper-case name), in
    square brackets only when it may be left out.
    """

    def collect_usage_pieces(self, ctx: Any) -> list[str]:
        pieces = [self.options_metavar] if self.options_metavar else []
        for param in self.get_params(ctx):
            if param.param_type_name != "argument":
                pieces.extend(param.get_usage_pieces(ctx))
                continue
            name = param.metavar or param.name.upper()
            if param.nargs != 1:
                name += "..."
            pieces.append(name if param.required else f"[{name}]")
        return pieces


class _Group(TyperGroup):
    """A command group whose command list shows each command's whole summary.

    click cuts the summary to the width left beside the names (``drawers...``
    at 80 columns); here it wraps instead.
    """

    def format_commands(self, ctx: Any, formatter: Any) -> None:
        rows = []
        for name in self.list_commands(ctx):
            cmd = self.get_command(ctx, name)
            if cmd is None or cmd.hidden:
                continue
            text = cmd.short_help or (cmd.help or "").split("\n\n")[0]
            rows.append((name, " ".join(text.split())))
        if rows:
            with formatter.section("Commands"):
                formatter.write_dl(rows)


class _OneLineErrors(_Group):
    """A command group whose errors are always one line and an exit code."""

    def make_context(self, *args: Any, **kwargs: Any) -> Any:
        try:  # `stockbias --help | head -1`: the help is written while the options are read
            return super().make_context(*args, **kwargs)
        except BrokenPipeError:
            output_closed()
            raise typer.Exit(EXIT_DONE) from None

    def invoke(self, ctx: Any) -> Any:
        try:
            return super().invoke(ctx)
        except KeyboardInterrupt:
            # typer would turn it into a silent exit 130; say what happened
            raise typer.Abort() from None
        except BrokenPipeError:
            # the reader of stdout went away (`... | head -1`): end quietly, exit 0
            # (typer would exit 1 here)
            output_closed()
            raise typer.Exit(EXIT_DONE) from None

    def main(self, args: Sequence[str] | None = None, prog_name: str | None = None,
             complete_var: str | None = None, standalone_mode: bool = True,
             windows_expand_args: bool = True, **extra: Any) -> Any:
        argv = list(sys.argv[1:] if args is None else args)
        try:
            rv = super().main(args=args, prog_name=prog_name, complete_var=complete_var,
                              standalone_mode=False, windows_expand_args=windows_expand_args,
                              **extra)
        except NoArgsIsHelpError as exc:  # the help, on stdout; no command is a usage error
            try:
                typer.echo(exc.format_message())
            except BrokenPipeError:
                output_closed()
            sys.exit(EXIT_BAD_INPUT)
        except UsageError as exc:
            where = f" ({exc.ctx.command_path})" if exc.ctx is not None else ""
            _say(f"stockbias: usage error{where}: {_flatten(exc.format_message())}")
            sys.exit(EXIT_BAD_INPUT)
        except StockFileError as exc:
            for line in exc.lines():
                _say(line)
            sys.exit(exc.exit_code)
        except StockbiasError as exc:
            _say(_with_command(exc, self, argv))
            sys.exit(exc.exit_code)
        except ClickException as exc:  # a file typer could not open, say: bad input
            _say(f"stockbias: {_flatten(exc.format_message())}")
            sys.exit(EXIT_BAD_INPUT)
        except (typer.Abort, KeyboardInterrupt):
            _interrupted()
        except BrokenPipeError:  # stdout closed outside a command (a usage error's help)
            output_closed()
            sys.exit(EXIT_DONE)
        except OSError as exc:
            if exc.filename is None:
                _internal_error(exc, argv)
            # a file the user named cannot be read or written: their input, not our bug
            _say(printable(f"{exc.filename}: {exc.strerror or _flatten(str(exc))}"))
            sys.exit(EXIT_BAD_INPUT)
        except Exception as exc:
            _internal_error(exc, argv)
        code = rv if isinstance(rv, int) else 0
        if code == EXIT_INTERRUPTED:  # typer's own reading of Ctrl-C while parsing options
            _interrupted()
        if standalone_mode:
            sys.exit(code)
        return code


def _with_command(exc: StockbiasError, group: Any, argv: list[str]) -> str:
    """``exc`` as one line; an error about an option also names the command it was
    given to (``stockbias export: option '--netlist': ...``)."""
    line = exc.one_line()
    if not (exc.column or "").startswith("-"):
        return line
    words = ["stockbias"]
    for word in argv:  # the command words lead the arguments: "stock", "reserve"
        sub = group.commands.get(word) if hasattr(group, "commands") else None
        if sub is None:
            break
        words.append(word)
        group = sub
    return f"{' '.join(words)}: {line}"


def _internal_error(exc: BaseException, argv: list[str]) -> None:
    """One line for an exception nobody anticipated, the traceback in a report; exit 3."""
    path = write_crash_report(exc, ["stockbias", *argv])
    where = (f"a full report was written to {path}" if path
             else "no report could be written (the temporary folder is not writable)")
    _say(f"stockbias: internal error: {type(exc).__name__}: "
         f"{_flatten(str(exc))[:300]}; {where}; please attach it to a bug report")
    sys.exit(EXIT_INTERNAL)


app = typer.Typer(
    cls=_OneLineErrors,
    name="stockbias",
    help="Bias bipolar transistor stages with the parts on your shelf.",
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
    # plain help: rich markup would eat bracketed text such as "[stage.values]", and
    # flags would show a "<bool>" value they do not take
    rich_markup_mode=None,
    context_settings={"help_option_names": ["-h", "--help"]},
)


def _show_version(value: bool) -> None:
    if value:
        typer.echo(f"stockbias {__version__}")
        raise typer.Exit()


@app.callback()
def _root(
    version: Annotated[bool, typer.Option(
        "--version", callback=_show_version, is_eager=True,
        help="Show the version and exit.")] = False,
) -> None:
    """Bias bipolar transistor stages with the parts on your shelf."""


def _register() -> None:
    from . import (
        board_cmd,
        check_cmd,
        consolidate_cmd,
        demo_cmd,
        design_cmd,
        export_cmd,
        stock_cmd,
        substitute_cmd,
        sweep_cmd,
    )

    app.command("demo", cls=_Command)(demo_cmd.demo)
    app.command("check", cls=_Command)(check_cmd.check)
    app.command("design", cls=_Command)(design_cmd.design)
    app.command("substitute", cls=_Command)(substitute_cmd.substitute)
    app.command("consolidate", cls=_Command)(consolidate_cmd.consolidate)
    app.command("export", cls=_Command)(export_cmd.export)
    app.command("sweep", cls=_Command)(sweep_cmd.sweep)
    app.add_typer(stock_cmd.app, name="stock", cls=_Group)
    app.add_typer(board_cmd.app, name="board", cls=_Group)
    for info in [*stock_cmd.app.registered_commands, *board_cmd.app.registered_commands]:
        if info.cls in (None, typer.core.TyperCommand):
            info.cls = _Command


try:
    _register()
except KeyboardInterrupt:  # pragma: no cover - Ctrl-C while the commands load
    _interrupted()


def main() -> None:
    """Console-script entry point (Ctrl-C ends even a long native solve, see failsafe)."""
    watch_interrupts()
    app()
