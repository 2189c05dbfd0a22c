"""``spectral-bulk`` command line: solve, follow and show.

Exit codes (one table for every command):

==== =====================================================================
0    success: every solution passed its certificate
1    a result failed its certificate (not converged, under-resolved, ...)
2    bad input: configuration, problem file, callbacks or guess
130  interrupted (Ctrl-C); what was computed is kept
==== =====================================================================
"""

import argparse
import logging
import os
import sys
import time

from .._version import __version__
from ..exceptions import SpectralBulkError

__all__ = ["main", "EXIT_OK", "EXIT_FAILED", "EXIT_INPUT", "EXIT_INTERRUPTED"]

EXIT_OK, EXIT_FAILED, EXIT_INPUT, EXIT_INTERRUPTED = 0, 1, 2, 130

log = logging.getLogger("spectral_bulk")


def _parser():
    p = argparse.ArgumentParser(
        prog="spectral-bulk",
        description="Certified spectral solutions of holographic bulk problems.",
    )
    p.add_argument("--version", action="store_true", help="print the version (with -v: dependencies too)")
    p.add_argument("-v", "--verbose", action="count", default=0, help="more log output (repeatable)")
    p.add_argument("-q", "--quiet", action="store_true", help="only errors")
    sub = p.add_subparsers(dest="command", metavar="COMMAND")

    s = sub.add_parser("solve", help="solve one problem from a TOML config")
    s.add_argument("config", help="TOML configuration file")
    s.add_argument("-o", "--output", help="netCDF file for the solution (default: [output] file)")

    f = sub.add_parser("follow", help="follow a family of solutions from a TOML config")
    f.add_argument("config", help="TOML configuration file")
    f.add_argument("-o", "--output", help="netCDF file for the family (default: [output] file)")
    f.add_argument("--resume", action="store_true", help="continue the family stored in the output file")

    sh = sub.add_parser("show", help="summarise a family or solution file")
    sh.add_argument("file", help="netCDF file written by solve or follow")
    sh.add_argument("--plot", nargs="?", const="", metavar="PNG",
                    help="write a PNG of an observable against the parameter")
    sh.add_argument("--observable", help="observable to plot (default: the first one)")
    return p


def _setup_logging(args):
    level = logging.ERROR if args.quiet else [logging.WARNING, logging.INFO, logging.DEBUG][min(args.verbose, 2)]
    logging.basicConfig(level=level, format="%(levelname)s %(message)s", stream=sys.stderr)
    logging.captureWarnings(True)


def main(argv=None):
    """Entry point; returns (and exits with) the status code."""
    args = _parser().parse_args(argv)
    _setup_logging(args)
    if args.version:
        if args.verbose:
            from .._versions import show_versions

            show_versions()
        else:
            print(f"spectral-bulk {__version__}")
        return EXIT_OK
    if args.command is None:
        _parser().print_help()
        return EXIT_INPUT
    from . import _commands

    handler = {"solve": _commands.cmd_solve, "follow": _commands.cmd_follow, "show": _commands.cmd_show}
    t0 = time.perf_counter()
    try:
        code = handler[args.command](args)
    except KeyboardInterrupt:
        print("spectral-bulk: interrupted", file=sys.stderr)
        code = EXIT_INTERRUPTED
    except BrokenPipeError:  # output piped into a pager or head that closed early
        sys.stdout = open(os.devnull, "w")
        code = EXIT_OK
    except SpectralBulkError as exc:
        print(f"spectral-bulk: error: {_one_line(exc)}", file=sys.stderr)
        code = EXIT_INPUT
    except (ValueError, TypeError, KeyError, AttributeError, NameError, ZeroDivisionError,
            ArithmeticError, ImportError, OSError) as exc:
        # failures inside user callbacks or bad values: one line, no traceback
        where = _user_frame(exc)
        print(f"spectral-bulk: error: {type(exc).__name__}: {_one_line(exc)}{where}", file=sys.stderr)
        code = EXIT_INPUT
    log.info("%s finished in %.2f s with exit code %d", args.command, time.perf_counter() - t0, code)
    return code


def _one_line(exc):
    return " ".join(str(exc).split()) or type(exc).__name__


def _user_frame(exc):
    """`` (file:line)`` of the innermost frame outside the package, if any."""
    pkg = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    tb = exc.__traceback__
    where = ""
    while tb is not None:
        fn = os.path.abspath(tb.tb_frame.f_code.co_filename)
        if not fn.startswith(pkg) and "site-packages" not in fn and "/lib/python" not in fn:
            where = f" ({os.path.basename(fn)}:{tb.tb_lineno})"
        tb = tb.tb_next
    return where

