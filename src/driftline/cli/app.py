"""The typer app every verb registers on, and what the verbs share: error handling, exit
codes, the stderr console and the --encoding option."""

from __future__ import annotations

import functools
import importlib
import logging
import sys
import traceback
from collections.abc import Callable, Sequence
from functools import wraps
from typing import TYPE_CHECKING, Any, TypeVar

import typer

# typer carries its own copy of click's parser (typer._click): its usage errors are these classes.
from typer._click.exceptions import ClickException, NoArgsIsHelpError, UsageError
from typer.core import TyperArgument, TyperCommand, TyperGroup

from driftline.core.version import __version__
from driftline.emit.atomic import quiet_stdout
from driftline.emit.safe import safe_text
from driftline.errors import DriftlineError

if TYPE_CHECKING:
    from rich.console import Console
    from typer._click.core import Command, Context, Parameter

EXIT_OK, EXIT_VIOLATION, EXIT_USAGE = 0, 1, 2

# --debug (the root option, before the verb): an error names its class and shows its traceback.
_debug = {"on": False}


def usage_error_text(exc: UsageError, debug: bool = False) -> str:
    """What a usage error click finds (a missing argument, an unknown option, a bad choice)
    prints: its usage line and help hint as click gives them, then 'error: message' as every
    other error of ours reads (the message's first letter in lower case, no final stop).

    >>> print(usage_error_text(UsageError("No such option: --format")))
    error: no such option: --format
    >>> print(usage_error_text(UsageError("Missing argument 'PATH...'."), debug=True))
    error (UsageError): missing argument 'PATH...'
    """
    head = ""
    if exc.ctx is not None:
        head = exc.ctx.get_usage() + "\n"
        if exc.ctx.command.get_help_option(exc.ctx) is not None:
            head += f"Try '{exc.ctx.command_path} {exc.ctx.help_option_names[0]}' for help.\n"
        head += "\n"
    message = exc.format_message().rstrip(".")
    if message[:1].isupper() and message[1:2].islower():  # a sentence, not a name such as 'PATH'
        message = message[0].lower() + message[1:]
    kind = f" ({type(exc).__name__})" if debug else ""
    return f"{head}error{kind}: {message}"


# Each verb's module, imported when the verb runs or its help is shown (and every one for the
# list of verbs): `driftline --version` imports none, `driftline scan --help` only scan's.
VERBS: dict[str, str] = {
    "scan": "driftline.cli.scan_cmd",
    "check": "driftline.cli.gate_cmd",
    "diff": "driftline.cli.gate_cmd",
    "schema": "driftline.cli.schema_cmd",
    "apply": "driftline.cli.apply_cmd",
}


def _settle_plainly(params: list[Parameter]) -> list[Parameter]:
    """Each parameter's plain values settled without pydantic, whose import and adapters would be a
    third of a small scan (cli/plainvalues.py); typer's own coercion when its internals moved."""
    try:
        from driftline.cli.plainvalues import settle_plainly

        return settle_plainly(params)
    except (ImportError, AttributeError, TypeError):
        return params


class _Verbs(TyperGroup):
    """The verbs' group: click's usage errors read 'error: …' like ours, exit 2 as click's do;
    a verb's module is imported when that verb is asked for."""

    def list_commands(self, ctx: Context) -> list[str]:
        return list(dict.fromkeys([*VERBS, *self.commands]))

    def get_command(self, ctx: Context, cmd_name: str) -> Command | None:
        if cmd_name not in self.commands:
            # An unknown name loads them all, so that click's "did you mean" sees every verb.
            for name in [cmd_name] if cmd_name in VERBS else list(VERBS):
                self._load(name)
        return super().get_command(ctx, cmd_name)

    def get_params(self, ctx: Context) -> list[Parameter]:
        return _settle_plainly(super().get_params(ctx))

    def invoke(self, ctx: Context) -> Any:
        try:
            return super().invoke(ctx)
        except BrokenPipeError:
            # A write to a closed pipe that no writer of ours caught (out_console and write_output
            # carry on to the command's own exit code): exit 0, not click's 1, which means drift here.
            quiet_stdout()
            return EXIT_OK

    def _load(self, name: str) -> None:
        from typer.main import get_command_from_info

        if name in self.commands:
            return
        importlib.import_module(VERBS[name])  # registers the verb on `app`
        for info in app.registered_commands:
            if info.name == name:
                self.commands[name] = get_command_from_info(
                    info, pretty_exceptions_short=app.pretty_exceptions_short, rich_markup_mode=app.rich_markup_mode
                )

    def main(
        self,
        args: Sequence[str] | None = None,
        prog_name: str | None = None,
        complete_var: str | None = None,
        standalone_mode: bool = True,
        windows_expand_args: bool = True,
        **extra: Any,
    ) -> Any:
        more = {"windows_expand_args": windows_expand_args, **extra}
        if not standalone_mode:
            return super().main(args, prog_name, complete_var, False, **more)
        try:
            # Not standalone: click hands back the exit code of typer.Exit, and raises its own errors.
            code = super().main(args, prog_name, complete_var, False, **more)
        except NoArgsIsHelpError as exc:  # 'driftline' alone: the help, as click shows it
            exc.show()
            sys.exit(exc.exit_code)
        except UsageError as exc:
            sys.stderr.write(usage_error_text(exc, _debug["on"]) + "\n")
            sys.exit(exc.exit_code)
        except ClickException as exc:
            sys.stderr.write(f"error: {exc.format_message()}\n")
            sys.exit(exc.exit_code)
        except typer.Abort:
            sys.stderr.write("aborted\n")
            sys.exit(1)
        sys.exit(code if isinstance(code, int) and not isinstance(code, bool) else 0)


app = typer.Typer(
    name="driftline",
    cls=_Verbs,
    help=(
        "Profile raw landing directories (JSON Lines, JSON, CSV/TSV, Parquet; gz/bz2/zst/xz) in record "
        "batches: observed schemas, drift with file/partition/row provenance, unified schema and cast "
        "rules, pipeline gates.\n\n"
        "Exit codes: 0 done, 1 policy violation (check), 2 usage or input error."
    ),
    no_args_is_help=True,
    add_completion=False,
    rich_markup_mode=None,
    context_settings={"help_option_names": ["-h", "--help"]},
)


def out_console(**options: Any) -> Console:
    """A console on standard output that, when its reader closes the pipe (`driftline scan … |
    head`), goes quiet and lets the command finish with its own exit code; rich's own console
    exits 1 there, which for us would mean drift or a violation."""
    from rich.console import Console

    class _PipeConsole(Console):
        def on_broken_pipe(self) -> None:
            self.quiet = True
            quiet_stdout()

    return _PipeConsole(**options)


@functools.cache
def err_console() -> Console:
    """The console of notes and warnings on stderr (rich is imported when something is printed)."""
    from rich.console import Console

    return Console(stderr=True, highlight=False)


class _NamedArgument(TyperArgument):
    """An argument shown by its metavar alone: 'PATH...' on the usage line and in the list, not
    typer's '{paths}...' and '<list[str]>'."""

    def _usage_display_name(self) -> str:
        return self.metavar or super()._usage_display_name()

    def display_type_rich(self, ctx: Any) -> str | None:
        return None if self.metavar else super().display_type_rich(ctx)


class PlainHelp(TyperCommand):
    """A verb whose --help names its arguments as a person reads them (each verb's metavar), and
    whose plain flag values are settled without pydantic (cli/plainvalues.py)."""

    def get_params(self, ctx: Context) -> list[Parameter]:
        return _settle_plainly(super().get_params(ctx))

    def __init__(self, *args: Any, **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        for p in self.params:
            if type(p) is TyperArgument:
                p.__class__ = _NamedArgument  # same fields; only how it is shown differs


F = TypeVar("F", bound=Callable[..., Any])


class _Lines(logging.Handler):
    """'warning: message' for a warning, 'note: message' for information, on the stderr of the
    moment (a test runner swaps sys.stderr between runs in one process)."""

    _driftline_cli = True

    def emit(self, record: logging.LogRecord) -> None:
        word = "note" if record.levelno < logging.WARNING else "warning"
        sys.stderr.write(f"{word}: {record.getMessage()}\n")


def _warnings_to_stderr() -> None:
    """Warnings and notes of the library (the "driftline" logger) as lines on stderr."""
    logger = logging.getLogger("driftline")
    if not any(getattr(h, "_driftline_cli", False) for h in logger.handlers):
        logger.addHandler(_Lines())
        logger.propagate = False
        logger.setLevel(logging.INFO)


def error_line(exc: DriftlineError, debug: bool = False) -> str:
    """The line an error prints: 'error: message'; with --debug the class is named too.

    >>> from driftline.errors import InputPathError
    >>> error_line(InputPathError("'x' does not exist"))
    "error: 'x' does not exist"
    >>> error_line(InputPathError("'x' does not exist"), debug=True)
    "error (InputPathError): 'x' does not exist"
    """
    kind = f" ({type(exc).__name__})" if debug else ""
    return f"error{kind}: {safe_text(exc, None)}"


def handles_errors(fn: F) -> F:
    """Turn library errors into 'error: message' on stderr and exit code 2, never a traceback
    (unless --debug asks for it)."""

    @wraps(fn)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        _warnings_to_stderr()
        try:
            return fn(*args, **kwargs)
        except DriftlineError as exc:
            # Plain write: an error message is never re-wrapped or styled.
            if _debug["on"]:
                traceback.print_exc(file=sys.stderr)
            sys.stderr.write(error_line(exc, _debug["on"]) + "\n")
            raise typer.Exit(EXIT_USAGE) from None
        except KeyboardInterrupt:
            sys.stderr.write("interrupted; no output file was left half-written\n")
            raise typer.Exit(130) from None

    return wrapper  # type: ignore[return-value]


def _known_encoding(value: str | None) -> str | None:
    from driftline.core.codecnames import codec_name

    if value is not None:
        try:
            codec_name(value)
        except ValueError as exc:
            raise typer.BadParameter(str(exc)) from None  # usage error: exit 2, never a traceback
    return value


ENCODING_OPTION: Any = typer.Option(
    None,
    "--encoding",
    metavar="NAME",
    callback=_known_encoding,
    help="Text encoding of CSV/TSV/JSON files (a Python codec name: utf-8, utf-16, latin-1, cp1252...); "
    "found per file from its first 64 KiB when not given.",
)


def _version(value: bool) -> None:
    if value:
        print(f"driftline {__version__}")
        raise typer.Exit(0)


@app.callback()
def _root(
    version: bool = typer.Option(
        False, "--version", callback=_version, is_eager=True, help="Print the version and exit."
    ),
    debug: bool = typer.Option(
        False, "--debug", help="On an error, name its class and show the traceback (for a bug report)."
    ),
) -> None:
    """driftline: what is really in a landing directory."""
    _debug["on"] = debug
