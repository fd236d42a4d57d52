"""The ``gradients`` command line.

::

    gradients demo --out DIR [--force] [--permutations N] [--seed S] [--quiet]
    gradients init DIR
    gradients check FILE | --community C --environment E [--locations L] [--site-column S]
    gradients run FILE [--out DIR] [--force] [--quiet]
    gradients plan FILE [--sites 20,40,60,80] [--surveys N] [--out DIR] [--force] [--quiet]
    gradients --version

The command line only parses arguments and calls :mod:`gradients.report`. Problems with the
input print one message to stderr and exit with status 2 (a folder or file that cannot be read
or written is such a problem, named with its path); unexpected errors exit with status 1 and a
hint. Ctrl-C exits with status 130 and SIGTERM with 143, each with one line and no half-written
report folder. Warnings are printed as one line each, in words (a floating-point warning of a
computation is counted, not printed raw). Long permutation runs show a progress bar when
stderr is a terminal (not with ``--quiet``).
"""

from __future__ import annotations

import argparse
import contextlib
import signal
import sys
import time
import warnings
from collections.abc import Iterator, Sequence
from typing import Any

from . import __version__
from ._errors import InputError

__all__ = ["main"]

EXIT_OK, EXIT_BUG, EXIT_INPUT = 0, 1, 2
#: Exit statuses after Ctrl-C and SIGTERM (128 + the signal number, the shells' convention).
EXIT_INTERRUPTED, EXIT_TERMINATED = 130, 143


class Terminated(BaseException):
    """Raised in the main thread when the process receives SIGTERM (handled like Ctrl-C)."""


def _on_sigterm(signum: int, frame: object) -> None:
    raise Terminated


def _parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="gradients",
        description="Which environmental gradients line up with turnover in biological "
                    "communities: permutation statistics and a report folder of tables, "
                    "figures and an HTML report.",
    )
    p.add_argument("--version", action="version", version=f"gradients {__version__}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND")

    demo = sub.add_parser("demo", help="run the whole job on the bundled demo data",
                          description="Run the whole job on the bundled, invented Corvanne "
                                      "Basin survey and write its report folder.")
    demo.add_argument("--out", required=True, metavar="DIR", help="report folder to write")
    demo.add_argument("--force", action="store_true",
                      help="replace an existing report folder (only once the new one is done)")
    demo.add_argument("--permutations", type=int, default=None, metavar="N",
                      help="permutations per test (default 999)")
    demo.add_argument("--seed", type=int, default=1, metavar="S", help="random seed (default 1)")
    demo.add_argument("--quiet", action="store_true", help="no progress bars")

    init = sub.add_parser("init", help="write a template project with the demo data",
                          description="Write a commented, runnable project file and a copy of "
                                      "the demo data into a new folder.")
    init.add_argument("folder", metavar="DIR", help="new (or empty) folder")

    check = sub.add_parser("check", help="validate a project file or tables",
                           description="Validate a project file (or tables given with "
                                       "--community/--environment/--locations) and print "
                                       "what would be analysed.")
    check.add_argument("project", nargs="?", metavar="FILE", help="project file (TOML)")
    check.add_argument("--community", metavar="FILE")
    check.add_argument("--environment", metavar="FILE")
    check.add_argument("--locations", metavar="FILE")
    check.add_argument("--site-column", default="site", metavar="NAME")
    check.add_argument("--crs", default=None, metavar="CRS")
    check.add_argument("--below-detection", default="error", metavar="POLICY",
                       help="error, half-limit, limit, zero or ros")

    run = sub.add_parser("run", help="run a project file and write its report folder",
                         description="Run the analyses of a project file and write the "
                                     "report folder.")
    run.add_argument("project", metavar="FILE", help="project file (TOML)")
    run.add_argument("--out", default=None, metavar="DIR",
                     help="report folder (default: `output.folder` of the project file)")
    run.add_argument("--force", action="store_true",
                     help="replace an existing report folder (only once the new one is done)")
    run.add_argument("--quiet", action="store_true", help="no progress bars")
    plan = sub.add_parser("plan", help="how many sites a survey needs, by simulation",
                          description="Fit a generating model to the project's survey (the "
                                      "pilot), simulate surveys of each number of sites, and "
                                      "write the power of each hypothesis test to a folder.")
    plan.add_argument("project", metavar="FILE", help="project file (TOML)")
    plan.add_argument("--sites", default=None, metavar="N,N,...",
                      help="numbers of sites, e.g. 20,40,60,80 (default: `plan.sites`)")
    plan.add_argument("--surveys", type=int, default=None, metavar="N",
                      help="surveys per number of sites (default: `plan.surveys`)")
    plan.add_argument("--out", default=None, metavar="DIR",
                      help="folder to write (default: `plan.folder` of the project file)")
    plan.add_argument("--force", action="store_true",
                      help="replace an existing plan folder (only once the new one is done)")
    plan.add_argument("--quiet", action="store_true", help="no progress bar")
    return p


@contextlib.contextmanager
def _progress(quiet: bool = False) -> Iterator[None]:
    """Progress bars on stderr when it is a terminal, none with ``--quiet``."""
    from .permutation import TerminalProgress, report_progress

    if quiet:
        with report_progress(None):
            yield
        return
    bars = TerminalProgress(sys.stderr)
    try:
        with report_progress(bars):
            yield
    finally:
        bars.close()


def _cmd_demo(args: argparse.Namespace) -> int:
    from .report import run_demo
    from .report._demo import DEMO_PERMUTATIONS

    n = args.permutations if args.permutations is not None else DEMO_PERMUTATIONS
    if n < 1:
        raise InputError(f"--permutations must be a positive whole number; got {n}.")
    if args.seed < 0:
        raise InputError(f"--seed must be zero or a positive whole number; got {args.seed}.")
    start = time.perf_counter()
    with _progress(getattr(args, "quiet", False)):
        folder = run_demo(args.out, force=args.force, n_resamples=n, rng=args.seed)
    print(f"Demo report written to {folder} in {time.perf_counter() - start:.0f} s.")
    print(f"Open {folder / 'report.html'} in a web browser.")
    return EXIT_OK


def _cmd_init(args: argparse.Namespace) -> int:
    from .report import init_project

    project = init_project(args.folder)
    print(f"Template project written to {project.parent}.")
    print(f"Check it with:  gradients check {project}")
    print(f"Run it with:    gradients run {project}")
    return EXIT_OK


def _cmd_check(args: argparse.Namespace) -> int:
    from .report._check import check, check_tables, describe

    if args.project is not None:
        if args.community or args.environment or args.locations:
            raise InputError("Give either a project file or --community/--environment "
                             "(/--locations), not both.")
        prepared = check(args.project)
    else:
        if not (args.community and args.environment):
            raise InputError("Give a project file, or at least --community and --environment "
                             "tables to check.")
        prepared = check_tables(args.community, args.environment, args.locations,
                                site_column=args.site_column, crs=args.crs,
                                censored=args.below_detection)
    print(describe(prepared.survey, prepared.project, prepared))
    return EXIT_OK


def _cmd_run(args: argparse.Namespace) -> int:
    from .report import run_project

    start = time.perf_counter()
    with _progress(getattr(args, "quiet", False)):
        folder = run_project(args.project, out=args.out, force=args.force)
    print(f"Report written to {folder} in {time.perf_counter() - start:.0f} s.")
    print(f"Open {folder / 'report.html'} in a web browser.")
    return EXIT_OK


def _site_counts(text: str | None) -> tuple[int, ...] | None:
    if text is None:
        return None
    try:
        return tuple(int(v) for v in text.replace(" ", "").split(",") if v)
    except ValueError:
        raise InputError(f"--sites must be whole numbers separated by commas, e.g. "
                         f"20,40,60,80; got {text!r}.") from None


def _cmd_plan(args: argparse.Namespace) -> int:
    from .planning import plan_project

    if args.surveys is not None and args.surveys < 1:
        raise InputError(f"--surveys must be a positive whole number; got {args.surveys}.")
    start = time.perf_counter()
    with _progress(getattr(args, "quiet", False)):
        folder = plan_project(args.project, sites=_site_counts(args.sites), out=args.out,
                              force=args.force, surveys=args.surveys)
    print(f"Survey plan written to {folder} in {time.perf_counter() - start:.0f} s.")
    print(f"Open {folder / 'report.html'} in a web browser.")
    return EXIT_OK


COMMANDS = {"demo": _cmd_demo, "init": _cmd_init, "check": _cmd_check, "run": _cmd_run,
            "plan": _cmd_plan}


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line with ``argv`` (default ``sys.argv[1:]``); return the exit status."""
    parser = _parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # --help, --version, or a usage error (argparse prints it)
        return int(exc.code) if isinstance(exc.code, int) else EXIT_INPUT
    if args.command is None:
        parser.print_help(sys.stderr)
        return EXIT_INPUT
    previous = _install_sigterm()
    counted: list[str] = []
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("default")
            warnings.showwarning = _warning_printer(args.command, counted)
            return COMMANDS[args.command](args)
    except InputError as exc:
        print(f"gradients {args.command}: {exc}", file=sys.stderr)
        return EXIT_INPUT
    except KeyboardInterrupt:
        print("gradients: interrupted; no report folder was written.", file=sys.stderr)
        return EXIT_INTERRUPTED
    except Terminated:
        print("gradients: stopped by SIGTERM; no report folder was written.", file=sys.stderr)
        return EXIT_TERMINATED
    except OSError as exc:  # a file or folder the system refuses: a problem with the path
        where = exc.filename if exc.filename is not None else "a file or folder"
        print(f"gradients {args.command}: cannot use {str(where)!r}: "
              f"{exc.strerror or exc}. This is a problem with the file or folder (its "
              "permissions, or the disk), not a bug: fix it and run again.", file=sys.stderr)
        return EXIT_INPUT
    except Exception as exc:
        print(f"gradients {args.command}: unexpected error: {type(exc).__name__}: {exc}\n"
              "This is a bug in gradients, not a problem with your data. Please report it "
              "with the command you ran; set GRADIENTS_DEBUG=1 to see the full traceback.",
              file=sys.stderr)
        import os

        if os.environ.get("GRADIENTS_DEBUG"):
            import traceback

            traceback.print_exc()
        return EXIT_BUG
    finally:
        if counted:
            print(f"gradients {args.command}: note: {len(counted)} floating-point warning(s) "
                  "arose in the computations (an overflow, a division by zero or an invalid "
                  "value). The inputs passed every check, so please report this with the "
                  "command you ran.", file=sys.stderr)
        _restore_sigterm(previous)


def _install_sigterm() -> Any:
    try:
        return signal.signal(signal.SIGTERM, _on_sigterm)
    except ValueError:  # not the main thread: leave the handler alone
        return None


def _restore_sigterm(previous: Any) -> None:
    if previous is not None:
        try:
            signal.signal(signal.SIGTERM, previous)
        except ValueError:
            pass


def _warning_printer(command: str, counted: list[str]) -> Any:
    """A ``warnings.showwarning`` that prints one line per warning, in words."""

    def show(message: Warning | str, category: type[Warning], filename: str, lineno: int,
             file: Any = None, line: str | None = None) -> None:
        if issubclass(category, RuntimeWarning):
            counted.append(str(message))
            return
        print(f"gradients {command}: warning: {message}", file=sys.stderr)

    return show


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
