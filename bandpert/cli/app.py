"""The ``bandpert`` command line: the typer app and the map from errors to exit statuses.

A user error prints one line to stderr and exits with status 2; an internal error exits 1 with a
short pointer (``--debug`` shows the traceback). The commands themselves live in
:mod:`bandpert.cli.commands`, one module each.
"""

from __future__ import annotations

import sys
import warnings
from typing import Annotated

import typer

from .. import __version__
from ..data import find_material
from ..errors import InputError, ModelWarning
from ..io import all_or_nothing
from .commands import bands, check, dos, fit, fullzone, gaps, kp, masses, optics, subbands, sweep
from .options import error_line

try:  # typer >= 0.26 carries its own copy of click; its exceptions are the ones raised
    from typer._click.core import Context
    from typer._click.exceptions import ClickException, UsageError
except ImportError:  # pragma: no cover - older typer on the public click
    from click.core import Context
    from click.exceptions import ClickException, UsageError

app = typer.Typer(add_completion=False, no_args_is_help=True, pretty_exceptions_enable=False,
                  help="Crystal bands by exact diagonalisation and by perturbation theory. "
                       "Add --debug anywhere on the line to see the traceback of an internal "
                       "error.")


@app.callback(invoke_without_command=True)
def _root(version: Annotated[bool, typer.Option("--version", metavar="", is_eager=True,
                                                help="Print the version and exit.")] = False
          ) -> None:
    if version:
        print(f"bandpert {__version__}")
        raise typer.Exit(0)


app.command()(bands.bands)
app.command()(check.check)
app.command()(gaps.gaps)
app.command()(masses.masses)
app.command()(kp.kp)
app.command()(fullzone.fullzone)
app.command()(sweep.sweep)
app.command()(dos.dos)
app.command()(optics.optics)
app.command()(subbands.subbands)
app.command()(fit.fit)


def _command_flags(group: typer.core.TyperGroup, args: list[str]) -> set[str]:
    """The option flags of the command a line runs (empty when it names none)."""
    name = next((a for a in args if not a.startswith("-")), None)
    command = group.commands.get(name) if name else None
    if command is None:
        return set()
    return {opt for p in command.params for opt in getattr(p, "opts", ())}


def _input_file(group: typer.core.TyperGroup, args: list[str]) -> str | None:
    """The FILE argument of a command line (the bundled file when it names one), or None.

    Every command takes the material file first; an error raised without a file (a limit of
    the library, a bad option) is reported against it, so every message names the file.
    """
    name = next((a for a in args if not a.startswith("-")), None)
    command = group.commands.get(name) if name else None
    if command is None:
        return None
    try:
        ctx = command.make_context(name, args[args.index(name) + 1:], resilient_parsing=True)
    except ClickException:
        return None
    file = ctx.params.get("file")
    if file is None:
        return None
    try:
        return str(find_material(file))
    except InputError:
        return str(file)


def _plain_help_flag(command) -> None:
    """Show ``--help`` like every other flag of ours: no value metavar (typer adds the option)."""
    for cmd in [command, *getattr(command, "commands", {}).values()]:
        option = cmd.get_help_option(Context(cmd))
        if option is not None:
            option.metavar = ""


def main(argv: list[str] | None = None) -> None:
    """Entry point: run the CLI and map errors to exit statuses (2 user, 1 internal)."""
    args = list(sys.argv[1:] if argv is None else argv)
    debug = "--debug" in args
    if debug:
        args.remove("--debug")
    command = typer.main.get_command(app)
    _plain_help_flag(command)

    held: list[str] = []  # model warnings, printed only if the command succeeds

    def show(message, category, filename, lineno, file=None, line=None) -> None:
        if issubclass(category, ModelWarning):
            held.append(f"bandpert: warning: {message}")
        elif debug:  # library housekeeping (e.g. deprecations in dependencies) only on request
            sys.stderr.write(warnings.formatwarning(message, category, filename, lineno, line))

    warnings.showwarning = show
    try:
        with all_or_nothing():  # a command writes all its files or none
            code = command.main(args=args, prog_name="bandpert", standalone_mode=False)
            if code == 130:  # click returns 130 for Ctrl-C: discard the staged files
                raise KeyboardInterrupt
        for text in dict.fromkeys(held):
            print(text, file=sys.stderr)
    except typer.Exit as exc:
        code = exc.exit_code
    except ClickException as exc:
        exc.show()
        code = 2 if isinstance(exc, UsageError) else exc.exit_code
    except (typer.Abort, KeyboardInterrupt):
        print("bandpert: interrupted; no partial output was left", file=sys.stderr)
        code = 130
    except InputError as exc:
        if debug:
            raise
        if exc.source is None:  # a library or option error: the file it concerns is the FILE
            exc.source = _input_file(command, args)
        print(f"bandpert: error: {error_line(exc, _command_flags(command, args))}",
              file=sys.stderr)
        code = 2
    except Exception as exc:
        if debug:
            raise
        text = " ".join(str(exc).split())[:200]  # one line, whatever the exception says
        print(f"bandpert: internal error ({exc.__class__.__name__}: {text}); this is a bug, "
              "rerun with --debug for the traceback", file=sys.stderr)
        code = 1
    sys.exit(code if isinstance(code, int) else 0)
