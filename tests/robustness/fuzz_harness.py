"""Run fuzz cases in a separate worker process and classify what each one did.

A case is some bytes written to a file and a *target* that opens it: the
reader (``read_recording``), ``probe``, the command line (``scalesieve bands``
in process, its stderr captured) or the recipe loader followed by a model
built on a small recording.  The contract allows two outcomes only:

``loaded``  a valid result (finite samples, positive rate, matching names);
``error``   one :class:`~scalesieve.errors.ScalesieveError` (exit status 2 and
            one ``scalesieve: error:`` line for the command line).

Everything else is a failure: ``crash`` (any other exception, exit status 1,
a traceback or warning on stderr, a message of more than one line, an
invalid result), ``hang`` (no answer within the time limit: the worker is
killed and a new one started), ``huge`` (the case allocated far more memory
than its input can justify, measured with :mod:`tracemalloc`, which numpy
reports its array buffers to, so even an untouched ``np.empty`` counts).

The worker is a plain ``python fuzz_harness.py --worker`` speaking JSON lines
on stdin/stdout, so a hang inside C code (libsndfile) or a hard crash of the
interpreter is seen and survived by the test process.
"""

from __future__ import annotations

import base64
import contextlib
import io
import json
import os
import re
import selectors
import shutil
import subprocess
import sys
import tempfile
import time
import tracemalloc
from collections import Counter
from dataclasses import dataclass, field

#: A case may allocate this much beyond what its input justifies (see allocation_limit).
BASE_ALLOCATION = 64 << 20
#: ... plus this many bytes per input byte (a float64 per sample, 8-bit samples: x8, and
#: the reader's copies).
ALLOCATION_PER_BYTE = 64
#: A message longer than this is no longer "one clear line".
MAX_MESSAGE = 400
DEFAULT_TIMEOUT_S = 30.0

_HERE = os.path.dirname(os.path.abspath(__file__))


def allocation_limit(size: int) -> int:
    return BASE_ALLOCATION + ALLOCATION_PER_BYTE * size


@dataclass
class Outcome:
    """What one case did."""

    kind: str                 # loaded | error | crash | hang | huge
    message: str = ""
    peak_bytes: int = 0
    seconds: float = 0.0

    @property
    def failed(self) -> bool:
        return self.kind not in ("loaded", "error")


# --------------------------------------------------------------------------- worker

def _check_recording(rec) -> str | None:
    import numpy as np

    s = rec.samples
    if s.ndim != 2 or s.shape[0] < 1 or s.shape[1] < 1:
        return f"invalid recording: samples of shape {s.shape}"
    if s.dtype not in (np.float32, np.float64):
        return f"invalid recording: dtype {s.dtype}"
    if not np.isfinite(s).all():
        return "invalid recording: non-finite samples"
    if not (rec.rate > 0 and np.isfinite(rec.rate)):
        return f"invalid recording: rate {rec.rate!r}"
    if len(rec.channel_names) != s.shape[1]:
        return "invalid recording: channel names do not match the channels"
    return None


def _error_problem(err, path: str | None) -> str | None:
    line = err.one_line()
    if not err.message or not line.strip():
        return "empty error message"
    if "\n" in line or "\r" in line:
        return f"message of more than one line: {line!r}"
    if len(line) > MAX_MESSAGE + (len(path) if path else 0):
        return f"message of {len(line)} characters: {line[:120]!r}..."
    if "Traceback" in line:
        return f"traceback in the message: {line[:200]!r}"
    return None


class _Worker:
    def __init__(self):
        import numpy as np

        # Import everything a case may need now, so imports do not count as its memory.
        import jsonschema  # noqa: F401
        import scalesieve.api as api
        import scalesieve.cli  # noqa: F401
        import scalesieve.commands.bands  # noqa: F401
        import scalesieve.commands.clean  # noqa: F401
        from scalesieve.core.recording import Recording

        # The measurement formats' libraries, where installed (the formats extra).
        for name in ("nptdms", "edfio", "h5py", "asammdf", "openpyxl", "scipy.io"):
            try:
                __import__(name)
            except ImportError:
                pass
        self.api = api
        # Inside the runner's home when there is one: removed with it, even after a kill.
        self.folder = tempfile.mkdtemp(prefix="scalesieve-fuzz-",
                                       dir=os.environ.get("SCALESIEVE_FUZZ_HOME") or None)
        os.chdir(self.folder)
        t = np.arange(4096) / 8000.0
        x = np.column_stack([np.sin(2 * np.pi * 440 * t), np.cos(2 * np.pi * 50 * t)])
        self.small = Recording(x, 8000.0, ["a", "b"], source="small.wav")
        self.counter = 0
        tracemalloc.start()

    def run(self, request: dict) -> dict:
        self.counter += 1
        data = base64.b64decode(request["data"])
        path = os.path.join(self.folder, f"case{self.counter % 8}{request.get('suffix', '')}")
        with open(path, "wb") as fh:
            fh.write(data)
        options = request.get("options") or {}
        tracemalloc.clear_traces()
        tracemalloc.reset_peak()
        start = time.perf_counter()
        with _native_output() as native:
            kind, message = self._target(request["target"], path, options)
        seconds = time.perf_counter() - start
        printed = native.read()
        if printed.strip() and kind in ("loaded", "error"):
            # C libraries write to descriptors 1 and 2 directly: a user would see it.
            kind, message = "crash", f"native output on the terminal: {printed[:300]!r}"
        _, peak = tracemalloc.get_traced_memory()
        if peak > allocation_limit(len(data)):
            kind, message = "huge", f"allocated {peak} bytes for a {len(data)}-byte input; " \
                + message
        elif kind == "error" and "memory" in message and len(data) < (1 << 20) \
                and "is available" not in message:
            # The reader turned a failed allocation into a message: it tried one.
            # (A refusal before reading, "... but only N GiB is available", did not.)
            kind = "huge"
        try:
            os.unlink(path)
        except OSError:
            pass
        return {"kind": kind, "message": message, "peak": peak, "seconds": seconds}

    def _target(self, target: str, path: str, options: dict) -> tuple[str, str]:
        from scalesieve.errors import ScalesieveError

        try:
            with _no_warnings_allowed():
                if target == "read":
                    rec = self.api.load(path, **options)
                    bad = _check_recording(rec)
                    return ("crash", bad) if bad else ("loaded", "")
                if target == "probe":
                    from scalesieve.io.readers import probe

                    facts = probe(path)
                    if facts["frames"] < 0 or facts["channels"] < 1:
                        return "crash", f"invalid probe: {facts}"
                    return "loaded", ""
                if target == "recipe":
                    return self._recipe(path, options)
                if target == "cli":
                    return self._cli(path, options)
                if target == "selfcheck":
                    return self._selfcheck(options)
                raise ValueError(f"unknown target {target}")
        except ScalesieveError as err:
            problem = _error_problem(err, path)
            if problem:
                return "crash", problem
            return "error", err.one_line()
        except Exception as exc:  # the very thing we look for: report, do not die
            import traceback

            tb = traceback.format_exception(type(exc), exc, exc.__traceback__)
            return "crash", f"{type(exc).__name__}: {exc} | {''.join(tb[-3:])[-600:]}"

    def _selfcheck(self, options: dict) -> tuple[str, str]:
        """Misbehave on purpose, so tests can show each detector fires."""
        import numpy as np

        what = options.get("do")
        if what == "native":
            os.write(2, b"a C library talking\n")
        elif what == "sleep":
            time.sleep(float(options.get("seconds", 60)))
        elif what == "allocate":
            a = np.empty(1 << 31)  # 16 GiB, never touched
            del a
        elif what == "raise":
            raise KeyError("selfcheck")
        elif what == "warn":
            np.float64(1e308) * 10
        elif what == "exit":
            os._exit(3)
        return "loaded", ""

    def _recipe(self, path: str, options: dict) -> tuple[str, str]:
        import numpy as np

        from scalesieve.recipe import load

        recipe = load(path)
        model = self.api.build_model(self.small, recipe)
        model.settle()
        if not np.isfinite(model.cleaned()).all():
            return "crash", "recipe gave non-finite cleaned samples"
        return "loaded", ""

    def _cli(self, path: str, options: dict) -> tuple[str, str]:
        from scalesieve.cli import main

        argv = [str(a).replace("{path}", path) for a in options.get("argv", ["bands", "{path}"])]
        out, err = io.StringIO(), io.StringIO()
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            code = main(argv)
        text = err.getvalue()
        lines = text.splitlines()
        if code == 0:
            if text.strip() and not all(ln.startswith("scalesieve: warning:") for ln in lines):
                return "crash", f"exit 0 with stderr {text[-300:]!r}"
            return "loaded", ""
        if code == 2 and len(lines) == 1 and lines[0].startswith("scalesieve: error: ") \
                and text.endswith("\n") and "Traceback" not in text:
            return "error", lines[0][len("scalesieve: error: "):]
        return "crash", f"exit {code} with stderr {text[-400:]!r}"


class _Captured:
    def __init__(self, sink):
        self._sink = sink

    def read(self) -> str:
        self._sink.seek(0)
        return self._sink.read().decode("utf-8", "replace")


@contextlib.contextmanager
def _native_output():
    """Descriptors 1 and 2 into a scratch file, to see what C code prints behind Python."""
    sink = tempfile.TemporaryFile()
    sys.stderr.flush()
    saved = [os.dup(1), os.dup(2)]
    os.dup2(sink.fileno(), 1)
    os.dup2(sink.fileno(), 2)
    try:
        yield _Captured(sink)
    finally:
        os.dup2(saved[0], 1)
        os.dup2(saved[1], 2)
        for fd in saved:
            os.close(fd)


@contextlib.contextmanager
def _no_warnings_allowed():
    """A warning a user would see on stderr (overflow, casting) counts as a crash."""
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("error")
        # Raised by libraries at import or for our own deprecations; not about the input.
        warnings.filterwarnings("ignore", category=DeprecationWarning)
        warnings.filterwarnings("ignore", category=PendingDeprecationWarning)
        yield


def _worker_main() -> int:
    worker = _Worker()
    out = sys.stdout
    sys.stdout = sys.stderr  # stray prints must not corrupt the answers
    for line in sys.stdin:
        if not line.strip():
            continue
        answer = worker.run(json.loads(line))
        out.write(json.dumps(answer) + "\n")
        out.flush()
    shutil.rmtree(worker.folder, ignore_errors=True)
    return 0


# --------------------------------------------------------------------------- parent

class CaseRunner:
    """A worker process that runs cases one by one; restarted after a hang or a death."""

    def __init__(self, timeout_s: float = DEFAULT_TIMEOUT_S):
        self.timeout_s = timeout_s
        self.proc: subprocess.Popen | None = None
        self.restarts = 0
        # The worker's own user folders: failure logs of the command line land here,
        # not in the real user's log folder.
        self.home = tempfile.mkdtemp(prefix="scalesieve-fuzz-home-")
        self._log = open(os.path.join(self.home, "worker-stderr.log"), "wb")

    def _start(self) -> None:
        env = dict(os.environ, OPENBLAS_NUM_THREADS="1", OMP_NUM_THREADS="1",
                   MKL_NUM_THREADS="1", PYTHONWARNINGS="ignore::DeprecationWarning",
                   XDG_STATE_HOME=os.path.join(self.home, "state"),
                   XDG_DATA_HOME=os.path.join(self.home, "data"),
                   XDG_CACHE_HOME=os.path.join(self.home, "cache"),
                   SCALESIEVE_DATA_DIR=os.path.join(self.home, "data"),
                   SCALESIEVE_LOG_DIR=os.path.join(self.home, "log"),
                   SCALESIEVE_FUZZ_HOME=self.home)
        self.proc = subprocess.Popen([sys.executable, os.path.join(_HERE, "fuzz_harness.py"),
                                      "--worker"], stdin=subprocess.PIPE,
                                     stdout=subprocess.PIPE, stderr=self._log, env=env,
                                     text=True, bufsize=1)

    def _stop(self) -> None:
        if self.proc is not None:
            with contextlib.suppress(OSError):
                self.proc.kill()
            self.proc.wait()
            self.proc = None

    def close(self) -> None:
        if self.proc is not None:
            with contextlib.suppress(OSError):
                self.proc.stdin.close()
            try:
                self.proc.wait(timeout=10)
            except subprocess.TimeoutExpired:
                self._stop()
            self.proc = None
        self._log.close()
        shutil.rmtree(self.home, ignore_errors=True)

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

    def run(self, target: str, data: bytes, suffix: str = "", options: dict | None = None,
            timeout_s: float | None = None) -> Outcome:
        if self.proc is None or self.proc.poll() is not None:
            if self.proc is not None:
                self.restarts += 1
            self._start()
        request = {"target": target, "suffix": suffix, "options": options or {},
                   "data": base64.b64encode(data).decode("ascii")}
        limit = self.timeout_s if timeout_s is None else timeout_s
        start = time.monotonic()
        try:
            self.proc.stdin.write(json.dumps(request) + "\n")
            self.proc.stdin.flush()
        except (BrokenPipeError, OSError):
            code = self.proc.poll()
            self._stop()
            return Outcome("crash", f"worker died (exit {code})")
        with selectors.DefaultSelector() as sel:
            sel.register(self.proc.stdout, selectors.EVENT_READ)
            # First answer after a (re)start also pays for the worker's imports.
            ready = sel.select(limit + 30.0 if self.proc_fresh else limit)
        self.proc_fresh = False
        if not ready:
            self._stop()
            self.restarts += 1
            return Outcome("hang", f"no answer in {limit:g} s", seconds=time.monotonic() - start)
        line = self.proc.stdout.readline()
        if not line:
            code = self.proc.wait()
            self.proc = None
            self.restarts += 1
            return Outcome("crash", f"worker died (exit {code})")
        a = json.loads(line)
        return Outcome(a["kind"], a["message"], a["peak"], a["seconds"])

    @property
    def proc_fresh(self) -> bool:
        return getattr(self, "_fresh_pid", None) != (self.proc.pid if self.proc else None)

    @proc_fresh.setter
    def proc_fresh(self, value: bool) -> None:
        self._fresh_pid = None if value else (self.proc.pid if self.proc else None)


# --------------------------------------------------------------------------- tallies

_QUOTED = re.compile(r"'[^']*'|\"[^\"]*\"")
_NUMBER = re.compile(r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?")


def message_template(message: str) -> str:
    """A message with its file, line, quoted values and numbers blanked.

    ``case3.wav: line 4: column 2 ('x'): cell 'a' is not a number`` and the same
    for another file and cell count as one kind of message.
    """
    text = re.sub(r"^\S*case\d[^:]*: ", "", message)
    text = re.sub(r"^\S+\.json: ", "", text)
    text = re.sub(r"^line \d+: ", "", text)
    text = _QUOTED.sub("Q", text)
    text = _NUMBER.sub("N", text)
    text = re.sub(r"\([^()]*\)", "(…)", text)
    return text.strip()


@dataclass
class Tally:
    """Counts over many cases: outcomes, distinct messages, the failures themselves."""

    cases: int = 0
    outcomes: Counter = field(default_factory=Counter)
    messages: Counter = field(default_factory=Counter)
    templates: Counter = field(default_factory=Counter)
    failures: list = field(default_factory=list)
    slowest_s: float = 0.0
    largest_peak: int = 0

    def add(self, outcome: Outcome, case: str = "") -> None:
        self.cases += 1
        self.outcomes[outcome.kind] += 1
        self.slowest_s = max(self.slowest_s, outcome.seconds)
        self.largest_peak = max(self.largest_peak, outcome.peak_bytes)
        if outcome.kind == "error":
            text = re.sub(r"^\S*case\d[^:]*: ", "", outcome.message)
            self.messages[text] += 1
            self.templates[message_template(outcome.message)] += 1
        if outcome.failed:
            self.failures.append((outcome.kind, outcome.message, case))

    def summary(self) -> dict:
        return {"cases": self.cases, "outcomes": dict(self.outcomes),
                "distinct_messages": len(self.messages),
                "distinct_message_kinds": len(self.templates),
                "crashes": self.outcomes.get("crash", 0), "hangs": self.outcomes.get("hang", 0),
                "huge_allocations": self.outcomes.get("huge", 0),
                "slowest_case_s": round(self.slowest_s, 3),
                "largest_allocation_bytes": self.largest_peak,
                "failures": self.failures[:20]}


if __name__ == "__main__" and "--worker" in sys.argv:
    sys.exit(_worker_main())
