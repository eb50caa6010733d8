"""Command-line interface: one click group, one module per command.

This package is the only importer of click. Commands parse their options
(units through :mod:`drainplan.units`), call one library function and print;
heavy libraries are imported inside the commands that need them.

Commands are registered in :data:`COMMANDS` and their modules are imported only
when the command runs (or its own help is asked), so ``drainplan --help`` loads
neither numpy nor the design core. :func:`main` limits the BLAS/OpenMP thread
pools of the process to one thread unless the user has set them.
"""

from __future__ import annotations

import importlib
import os
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
    for command in commands:           # the commands loaded so far
        if isinstance(command, click.Group):          # subcommands (drainplan soil ...)
            names |= _option_names(command)
        for p in command.params:
            names.update(o for o in getattr(p, "opts", []) if o.startswith("--"))
    return names


class _Terminated(KeyboardInterrupt):
    """SIGTERM, handled like Ctrl-C: temporary files are removed on the way out."""


def _on_sigterm(signum, frame):
    raise _Terminated()


#: Commands loaded on demand: name -> (module in drainplan.cli, command object,
#: short help shown by ``drainplan --help``; must equal the command's own
#: ``short_help``, which tests/test_imports.py checks).
COMMANDS = {
    "spacing": ("spacing", "spacing",
                "Drain spacing by Hooghoudt, Ernst, Kirkham or Glover-Dumm."),
    "layout": ("layout", "layout", "Lay out laterals and mains over field boundaries."),
    "pipes": ("pipes", "pipes", "Size and grade the pipes of a layout."),
    "init": ("design", "init", "Write a commented starter project file."),
    "design": ("design", "design", "Run the whole design from a project file."),
    "check": ("check", "check", "Check a contractor's proposal against the project's criteria."),
    "soil": ("soil", "soil",
             "Soil inputs: auger-hole tests, texture estimates, drainable porosity."),
    "batch": ("batch", "batch", "Design many fields at once, each with its own soil."),
    "simulate": ("simulate", "simulate",
                 "Simulate the water table between drains over a weather record."),
}

#: Environment variables that size the thread pools of BLAS and OpenMP libraries.
THREAD_VARIABLES = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS",
                    "BLIS_NUM_THREADS", "VECLIB_MAXIMUM_THREADS", "NUMEXPR_NUM_THREADS")


def limit_threads(environ=None):
    """Run BLAS and OpenMP on one thread in this process, unless the user chose.

    drainplan's work is vectorised numpy on small matrices; a pool of BLAS
    threads only adds start-up and contention (the first scipy
    ``LinearNDInterpolator`` call took seconds of CPU with the default pool,
    milliseconds with one thread). If any of :data:`THREAD_VARIABLES` is set,
    nothing is changed. The variables act only if numpy is not loaded yet;
    otherwise threadpoolctl, if installed, limits the loaded pools.

    Returns
    -------
    bool
        True if the limit was applied.
    """
    environ = os.environ if environ is None else environ
    if any(v in environ for v in THREAD_VARIABLES):
        return False
    for v in THREAD_VARIABLES:
        environ[v] = "1"
    if "numpy" in sys.modules:
        try:
            from threadpoolctl import threadpool_limits
        except ImportError:
            pass
        else:
            threadpool_limits(1)
    return True


#: Environment variables by which a user tunes the C library's allocator.
ALLOCATOR_VARIABLES = ("GLIBC_TUNABLES", "MALLOC_MMAP_THRESHOLD_", "MALLOC_TRIM_THRESHOLD_",
                       "MALLOC_TOP_PAD_")


def tune_allocator(environ=None):
    """Let the C library keep freed memory for reuse (glibc on Linux), unless the user chose.

    numpy works on blocks of a few thousand values; each temporary of 128 KiB or
    more is by default mapped fresh from the kernel and returned on release, and
    freed memory at the top of the heap is returned as well. Fresh pages made the
    spacing solvers and their one-evaluation yardstick 1.7-2.3x slower on the
    2-core test machine. This raises the mmap threshold to 16 MiB and the trim
    threshold to 64 MiB with ``mallopt``. Nothing is changed on other systems,
    or if the user has set one of :data:`ALLOCATOR_VARIABLES`.

    Returns
    -------
    bool
        True if the thresholds were set.
    """
    environ = os.environ if environ is None else environ
    if not sys.platform.startswith("linux") or any(v in environ for v in ALLOCATOR_VARIABLES):
        return False
    try:
        import ctypes

        libc = ctypes.CDLL(None)
        m_trim_threshold, m_mmap_threshold = -1, -3          # <malloc.h>
        return bool(libc.mallopt(m_mmap_threshold, 16 << 20)
                    and libc.mallopt(m_trim_threshold, 64 << 20))
    except (OSError, AttributeError):
        return False


class DrainplanGroup(click.Group):
    """Click group that turns every error into one line on stderr.

    Exit codes: 0 success, 1 a domain failure (no solution) or an interruption,
    2 a bad option, input value or input geometry. Commands of :data:`COMMANDS`
    are imported on first use.
    """

    def list_commands(self, ctx):
        return sorted(set(self.commands) | set(COMMANDS))

    #: Set by :func:`main`: tune the allocator when a command is first loaded (not
    #: for ``--help``, which should not pay for ctypes).
    tune_on_load = False

    def get_command(self, ctx, cmd_name):
        if cmd_name not in self.commands and cmd_name in COMMANDS:
            if self.tune_on_load:
                type(self).tune_on_load = False
                tune_allocator()
            module, attr, _ = COMMANDS[cmd_name]
            mod = importlib.import_module(f"{__name__}.{module}")
            self.add_command(getattr(mod, attr), cmd_name)
        return self.commands.get(cmd_name)

    def format_commands(self, ctx, formatter):
        """The command list, from :data:`COMMANDS` without importing the commands."""
        rows = []
        for name in self.list_commands(ctx):
            if name in self.commands:
                cmd = self.commands[name]
                if cmd.hidden:
                    continue
                text = cmd.get_short_help_str(formatter.width - 6 - len(name))
            else:
                text = COMMANDS[name][2]
            rows.append((name, text))
        if rows:
            with formatter.section("Commands"):
                formatter.write_dl(rows)

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


def main(argv=None):
    """Console-script entry point (one BLAS thread and an allocator that keeps freed
    memory, unless the user set their own).

    The garbage collector's full passes (over every object of numpy, pandas,
    matplotlib...) run a tenth as often (its youngest generations as usual): they
    took 0.25 s of a demo design's CPU. On the way out the objects left are frozen
    out of the collector: the process ends next, and its last passes over a design's
    millions of objects cost 0.3-0.5 s. Exit handlers and file closing are as usual.
    """
    import gc

    limit_threads()
    DrainplanGroup.tune_on_load = True
    if argv is None:
        g0, g1, g2 = gc.get_threshold()
        gc.set_threshold(g0, g1, max(g2, 100))
    try:
        return cli.main(args=argv, prog_name="drainplan")
    finally:
        if argv is None:                # the console script, not a caller in a program
            gc.freeze()
