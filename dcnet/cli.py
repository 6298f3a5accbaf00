"""The ``dcnet`` command line: a thin face over the Python API.

Exit codes: 0 done and every check passed; 1 done but a check failed; 2 bad input or an
unsolvable circuit (with ``file:line:col`` and a hint, never a traceback); 130 interrupted
(Ctrl-C, SIGINT) and 143 terminated (SIGTERM): the run stops at once, worker processes are
ended, and no output file is written or left half-written.

Each command lives in ``dcnet/commands/<name>.py``. Only light modules are imported on the
way to a command; commands that need heavy libraries (sympy, plotting) import them inside
their own ``run``.
"""

from __future__ import annotations

import argparse
import sys
from importlib import import_module

from . import __version__
from .commands import COMMANDS
from .commands.common import EXIT_BAD_INPUT, EXIT_CHECK_FAILED, EXIT_OK  # noqa: F401 - re-exported
from .errors import DcnetError

__all__ = ["main"]


class _Parser(argparse.ArgumentParser):
    """argparse's messages (usage, errors quoting the arguments) with control characters shown escaped."""

    def _print_message(self, message, file=None):
        from .display import shown

        super()._print_message(shown(message) if message else message, file)


def _parser() -> argparse.ArgumentParser:
    p = _Parser(
        prog="dcnet",
        description="Solve DC battery networks exactly from dcnet circuit files (.dcn).",
        epilog="Exit codes: 0 ok, 1 a check failed, 2 bad input or unsolvable circuit, "
        "130 interrupted (Ctrl-C), 143 terminated (SIGTERM); an interrupted run writes no output.",
    )
    p.add_argument("--version", action="version", version=f"dcnet {__version__}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND")  # subcommands' parsers are _Parser too
    for name in COMMANDS:
        import_module(f".commands.{name}", __package__).add_parser(sub)
    return p


class Terminated(KeyboardInterrupt):
    """SIGTERM, raised where the program is, so that it unwinds as for Ctrl-C: worker
    processes are ended and temporary output files removed."""


def _on_sigterm(signum, frame):
    raise Terminated()


#: set once main has caught the interruption and is ending
_ending = False


def _unraisable(hook):
    """A hook for exceptions Python cannot raise (in a finalizer, a weakref callback): a SIGTERM
    or Ctrl-C that lands there is swallowed and its traceback printed ("Exception ignored in"),
    about one folder run in five under load. Print nothing for it, and deliver the signal again
    (unless the run is already ending), so it reaches the program where it can unwind."""

    def handle(unraisable):
        exc = unraisable.exc_value
        if isinstance(exc, KeyboardInterrupt):
            if not _ending:
                import os
                import signal
                import threading

                # from another thread, a moment later: sent from here it would be raised inside
                # this hook, which is no better a place than the finalizer
                again = threading.Timer(0.01, os.kill, (os.getpid(), signal.SIGTERM if isinstance(exc, Terminated) else signal.SIGINT))
                again.daemon = True
                again.start()
            return
        hook(unraisable)

    return handle


def main(argv: list[str] | None = None) -> int:
    parser = _parser()
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help()
        return EXIT_BAD_INPUT
    import signal

    from .floating import as_error, is_floating_point_warning, refused

    global _ending
    _ending = False
    try:
        before = signal.signal(signal.SIGTERM, _on_sigterm)
    except ValueError:  # not the main thread (an embedding application): its own handlers stay
        before = None
    hook_before = sys.unraisablehook
    if before is not None:
        sys.unraisablehook = _unraisable(hook_before)
    try:
        try:
            with refused():  # numpy's floating-point warnings become dcnet's error (dcnet/floating.py)
                return args.run(args)
        except RuntimeWarning as exc:
            if not is_floating_point_warning(exc):
                raise
            raise as_error(exc) from None
    except DcnetError as err:
        print(f"dcnet: {err.render()}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except KeyboardInterrupt as exc:
        _ending = True
        term = isinstance(exc, Terminated)
        print("dcnet: terminated (SIGTERM)" if term else "dcnet: interrupted", file=sys.stderr)
        return 143 if term else 130
    except BrokenPipeError:
        return EXIT_OK
    except (MemoryError, RecursionError) as exc:
        print(f"dcnet: the work ran out of {'memory' if isinstance(exc, MemoryError) else 'stack'} ({type(exc).__name__}); "
              "hint: the circuit may be too large for this machine, or the --max-* limits too high", file=sys.stderr)
        return EXIT_BAD_INPUT
    except Exception as exc:  # a fault of dcnet's own: a message, not a traceback (DCNET_DEBUG=1 shows it)
        import os

        if os.environ.get("DCNET_DEBUG"):
            raise
        print(f"dcnet: internal fault in dcnet ({type(exc).__name__}: {exc}); this is a fault of dcnet, not of your "
              "circuit: please report it with the circuit file (DCNET_DEBUG=1 shows the traceback)", file=sys.stderr)
        return EXIT_BAD_INPUT
    finally:
        if before is not None:
            signal.signal(signal.SIGTERM, before)
            sys.unraisablehook = hook_before


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
