"""Command-line interface: one click group, one module per command.

This package is the only importer of click. Commands parse their options
(units through :mod:`drainplan.units`), call one library function and print;
heavy libraries are imported inside the commands that need them.
"""

from __future__ import annotations

import sys

import click

from .. import __version__
from ..errors import DrainplanError, InputError

__all__ = ["cli", "main"]


def option_name(param):
    """'water_table_depth' -> '--water-table-depth' (a core parameter as its CLI option)."""
    return "--" + param.replace("_", "-")


def _option_names(group):
    """Long option names of every command in the group (to name an input by its option)."""
    names = set()
    for command in group.commands.values():
        for p in command.params:
            names.update(o for o in getattr(p, "opts", []) if o.startswith("--"))
    return names


class DrainplanGroup(click.Group):
    """Click group that turns every error into one line on stderr.

    Exit codes: 0 success, 1 a domain failure (no solution, unreadable data),
    2 a bad option or input value.
    """

    def main(self, args=None, prog_name=None, complete_var=None, standalone_mode=True,
             **extra):
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
        except click.Abort:
            rv = self._error("aborted", 1, standalone_mode)
        except InputError as exc:
            msg = str(exc)
            opt = option_name(exc.param) if exc.param else None
            if opt in _option_names(self) and not msg.startswith("--"):
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
        if standalone_mode:
            sys.exit(rv or 0)
        return rv

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
    from .simulate import simulate
    from .spacing import spacing

    for command in (spacing, layout, pipes, init, design, simulate):
        cli.add_command(command)


_register()


def main(argv=None):
    """Console-script entry point."""
    return cli.main(args=argv, prog_name="drainplan")
