"""The ``scalesieve`` command line (docs/reference.md).

``bands``, ``clean``, ``events``, ``batch``, ``kurtosis``, ``envelope`` and ``--version``
never import Qt.
Exit status: 0 success, 2 bad input or usage (one line on stderr), 1 an
unexpected failure (a short message and the path of a log with details).
"""

from __future__ import annotations

import argparse
import importlib
import importlib.util
import sys

from scalesieve import __version__
from scalesieve.errors import ScalesieveError

PROG = "scalesieve"
# subcommand -> module with configure(parser) and run(args) -> int
COMMANDS = {
    "bands": ("scalesieve.commands.bands", "per-band table of a recording"),
    "clean": ("scalesieve.commands.clean", "apply a recipe or quick edits and write the result"),
    "events": ("scalesieve.commands.events", "find and time-stamp transients at fine scales"),
    "batch": ("scalesieve.commands.batch", "apply one recipe to many recordings"),
    "kurtosis": ("scalesieve.commands.kurtosis", "kurtosis of every packet band: where impacts live"),
    "envelope": ("scalesieve.commands.envelope", "envelope spectrum of a band, bearing lines"),
}
WINDOW = "scalesieve.commands.window"


class UsageError(Exception):
    pass


class Parser(argparse.ArgumentParser):
    """argparse with one-line errors in our format: the command, what was wrong, its usage."""

    def error(self, message):  # noqa: D401 - argparse API
        command = self.prog[len(PROG):].strip()
        where = f"{command}: " if command else ""
        raise UsageError(f"{where}{message} (usage: {short_usage(self)}; "
                         f"'{self.prog} --help' tells more)")


def short_usage(parser: argparse.ArgumentParser) -> str:
    """``scalesieve clean FILE -o OUT [options]``: the positionals and required options.

    argparse's own usage line lists every option, many lines long; this one
    fits the one-line error.
    """
    words = [parser.prog]
    optional = False
    for action in parser._actions:          # reading argparse's list, not writing it
        if isinstance(action, (argparse._HelpAction, argparse._VersionAction)):
            continue
        name = action.metavar or (action.dest.upper() if not action.option_strings
                                  else None)
        if not action.option_strings:
            word = {"?": f"[{name}]", "*": f"[{name} ...]", "+": f"{name} ..."}.get(
                action.nargs, name)
            words.append(word)
        elif action.required:
            flag = action.option_strings[0]
            words.append(flag if action.nargs == 0 else f"{flag} {name or action.dest.upper()}")
        else:
            optional = True
    if optional:
        words.append("[options]")
    return " ".join(words)


def _version_text() -> str:
    return f"{PROG} {__version__}"


def _module(name: str):
    if importlib.util.find_spec(name) is None:
        return None
    return importlib.import_module(name)


def build_parser(command: str | None) -> tuple[argparse.ArgumentParser, object]:
    if command is None:
        mod = _module(WINDOW)
        p = Parser(prog=PROG, description=(
            "Scalesieve: see a recording at each time scale and clean it. "
            "Without a subcommand, opens the desktop window on FILE (or on the demo "
            "recording). Subcommands: " + ", ".join(COMMANDS) +
            f"; '{PROG} SUBCOMMAND --help' tells more."))
        p.add_argument("--version", action="version", version=_version_text())
        p.add_argument("--debug", action="store_true", help="show full tracebacks")
        mod.configure(p)
        return p, mod
    modname, help_text = COMMANDS[command]
    mod = _module(modname)
    if mod is None:
        raise UsageError(f"the '{command}' command is not available in this build")
    p = Parser(prog=f"{PROG} {command}", description=mod.__doc__.strip().splitlines()[0]
               if mod.__doc__ else help_text)
    p.add_argument("--debug", action="store_true", help="show full tracebacks")
    mod.configure(p)
    return p, mod


def _refuse_unknown_command(first: str) -> None:
    """A first word that is neither a command nor a file (a mistyped ``band``): say both."""
    import os

    if first.startswith("-") or os.path.exists(first) or os.path.splitext(first)[1] \
            or os.sep in first:
        return          # an option, or a file name: the reader names what is wrong with it
    raise UsageError(f"{first!r} is neither a command ({', '.join(COMMANDS)}) nor a file "
                     f"(usage: {PROG} COMMAND ... or {PROG} [FILE] [options]; "
                     f"'{PROG} --help' tells more)")


def _log_failure(exc: BaseException) -> str | None:
    from scalesieve.failure_log import log_exception

    return log_exception(exc, "cli")


class OutputFailed(Exception):
    """Standard output could not be written (a full disk, a closed pipe)."""

    def __init__(self, exc: OSError):
        super().__init__(str(exc))
        self.exc = exc


class _GuardedOutput:
    """Standard output whose write errors are told apart from every other OSError."""

    def __init__(self, stream):
        self._stream = stream

    def write(self, text):
        try:
            return self._stream.write(text)
        except OSError as exc:
            raise OutputFailed(exc) from None

    def flush(self):
        try:
            return self._stream.flush()
        except OSError as exc:
            raise OutputFailed(exc) from None

    def __getattr__(self, name):
        return getattr(self._stream, name)


def _silence_stdout() -> None:
    """Point file descriptor 1 at the null device, so the flush at exit cannot fail again."""
    import os

    try:
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
    except (OSError, ValueError, AttributeError):
        pass


def _output_failed(exc: OSError) -> int:
    """A closed pipe (the reader had enough, e.g. ``| head``) is quiet; other failures one line."""
    import errno

    _silence_stdout()
    if isinstance(exc, BrokenPipeError) or exc.errno == errno.EPIPE:
        return 0
    why = ("not enough disk space" if exc.errno == errno.ENOSPC
           else exc.strerror or str(exc))
    print(f"{PROG}: error: standard output: cannot write the output ({why})", file=sys.stderr)
    return 2


def main(argv: list[str] | None = None) -> int:
    real_stdout = sys.stdout
    if real_stdout is not None and not isinstance(real_stdout, _GuardedOutput):
        sys.stdout = _GuardedOutput(real_stdout)
    try:
        code = _main(argv)
        if sys.stdout is not None:
            sys.stdout.flush()      # a write error shows here, not at interpreter exit
        return code
    except OutputFailed as exc:
        return _output_failed(exc.exc)
    finally:
        sys.stdout = real_stdout


def _main(argv: list[str] | None = None) -> int:
    argv = list(sys.argv[1:] if argv is None else argv)
    debug = "--debug" in argv
    command = argv[0] if argv and argv[0] in COMMANDS else None
    rest = argv[1:] if command else argv
    try:
        if command is None and rest and rest[0] in ("--version", "-V"):
            print(_version_text())
            return 0
        if command is None and rest and rest[0] in ("-h", "--help") and _module(WINDOW) is None:
            print(f"usage: {PROG} {{{','.join(COMMANDS)}}} ...")
            return 0
        if command is None and rest:
            _refuse_unknown_command(rest[0])
        parser, mod = build_parser(command)
        args = parser.parse_args(rest)
        if command is not None:
            from scalesieve.freed_memory import keep_freed_memory

            keep_freed_memory()     # a command's block temporaries reused, not fresh pages
        return int(mod.run(args) or 0)
    except UsageError as exc:
        print(f"{PROG}: error: {exc}", file=sys.stderr)
        return 2
    except ScalesieveError as exc:
        if debug:
            raise
        print(f"{PROG}: error: {exc.one_line()}", file=sys.stderr)
        return 2
    except OutputFailed:
        raise
    except BrokenPipeError:
        # the reader of our output went away (e.g. `| head`): not a failure
        _silence_stdout()
        return 0
    except KeyboardInterrupt:
        print(f"{PROG}: interrupted", file=sys.stderr)
        return 130
    except MemoryError as exc:
        if debug:
            raise
        print(f"{PROG}: error: not enough memory for this recording ({exc}); "
              f"try --channel K or a shorter file", file=sys.stderr)
        return 2
    except Exception as exc:  # the last line of defence: a log, not a traceback
        if debug:
            raise
        # a failure the window's reporter logged already says what failed and where its log is
        logged = getattr(exc, "log_path", None)
        path = logged or _log_failure(exc)
        where = f"; details in {path}" if path else ""
        what = str(exc) if logged else f"{type(exc).__name__}: {exc}"
        print(f"{PROG}: unexpected failure: {what}{where}", file=sys.stderr)
        return 1


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
