"""Command-line interface: one click group, one module per command.

This package is the only importer of click. Commands parse their options
(units through :mod:`drainplan.units`), call one library function and print;
heavy libraries are imported inside the commands that need them.
"""

from __future__ import annotations

import signal
import sys
import threading

import click

from .. import __version__
from ..errors import DrainplanError, GeometryError, InputError

__all__ = ["cli", "main"]


def option_name(param):
    """'water_table_depth' -> '--water-table-depth' (a core parameter as its CLI option)."""
    return "--" + param.replace("_", "-")


def _option_names(group, command_name=None):
    """Long option names of the command run (of every command in the group if none
    is known), to name an input by its option."""
    names = set()
    commands = ([group.commands[command_name]] if command_name in group.commands
                else group.commands.values())
    for command in commands:
        for p in command.params:
            names.update(o for o in getattr(p, "opts", []) if o.startswith("--"))
    return names


class _Terminated(KeyboardInterrupt):
    """SIGTERM, handled like Ctrl-C: temporary files are removed on the way out."""


def _on_sigterm(signum, frame):
    raise _Terminated()


class DrainplanGroup(click.Group):
    """Click group that turns every error into one line on stderr.

    Exit codes: 0 success, 1 a domain failure (no solution) or an interruption,
    2 a bad option, input value or input geometry.
    """

    def main(self, args=None, prog_name=None, complete_var=None, standalone_mode=True,
             **extra):
        self._command_name = None
        old_term = None
        if threading.current_thread() is threading.main_thread():
            old_term = signal.signal(signal.SIGTERM, _on_sigterm)
        try:
            rv = super().main(args=args, prog_name=prog_name or "drainplan",
                              complete_var=complete_var, standalone_mode=False, **extra)
        except click.exceptions.NoArgsIsHelpError as exc:
            click.echo(exc.ctx.get_help() if exc.ctx else str(exc))
            rv = 0
        except click.UsageError as exc:
            msg = " ".join(exc.format_message().split())
            if exc.ctx is not None and exc.ctx.command_path:
                msg = f"{msg} (see '{exc.ctx.command_path} --help')"
            rv = self._error(msg, 2, standalone_mode)
        except click.Abort as exc:
            term = isinstance(exc.__context__, _Terminated) or isinstance(exc.__cause__,
                                                                          _Terminated)
            rv = self._error("terminated (SIGTERM); no output written" if term else
                             "aborted; no output written", 1, standalone_mode)
        except _Terminated:
            rv = self._error("terminated (SIGTERM); no output written", 1, standalone_mode)
        except (InputError, GeometryError) as exc:        # bad input, bad geometry: exit 2
            msg = str(exc)
            opt = option_name(exc.param) if exc.param else None
            if opt in _option_names(self, self._command_name) and not msg.startswith("--"):
                msg = f"{opt}: {msg}"
            rv = self._error(msg, 2, standalone_mode)
        except DrainplanError as exc:
            rv = self._error(str(exc), 1, standalone_mode)
        except click.ClickException as exc:
            rv = self._error(" ".join(exc.format_message().split()), exc.exit_code,
                             standalone_mode)
        except OSError as exc:
            rv = self._error(f"{exc.strerror or exc}: {exc.filename or ''}".rstrip(": "),
                             1, standalone_mode)
        finally:
            if old_term is not None:
                signal.signal(signal.SIGTERM, old_term)
        if standalone_mode:
            sys.exit(rv or 0)
        return rv

    def resolve_command(self, ctx, args):
        name, cmd, rest = super().resolve_command(ctx, args)
        self._command_name = cmd.name if cmd is not None else name
        return name, cmd, rest

    @staticmethod
    def _error(message, code, standalone_mode):
        click.echo(f"drainplan: error: {message}", err=True)
        return code


@click.group(cls=DrainplanGroup, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, "--version", prog_name="drainplan")
@click.option("-v", "--verbose", count=True, help="More detail on stderr.")
@click.option("-q", "--quiet", is_flag=True, help="Only errors on stderr.")
@click.pass_context
def cli(ctx, verbose, quiet):
    """Design agricultural subsurface (pipe) drainage: drain spacing and depth by
    the published methods.

    Depths are below the ground surface. Values may carry units ('90 cm',
    '3 ft', '0.6 m/d', '3/8 in/d'); a bare number means metres, metres per
    day or days.
    """
    ctx.obj = {"verbose": verbose, "quiet": quiet}


def _register():
    from .design import design, init
    from .layout import layout
    from .pipes import pipes
    from .spacing import spacing

    for command in (spacing, layout, pipes, init, design):
        cli.add_command(command)


_register()


def main(argv=None):
    """Console-script entry point."""
    return cli.main(args=argv, prog_name="drainplan")
