"""Fuzz the readers, the recipe loader and the command line for as long as you like.

    python tests/robustness/fuzz_long.py --minutes 10
    python tests/robustness/fuzz_long.py --cases 20000 --seed 7
    python tests/robustness/fuzz_long.py --minutes 10 --engine atheris   # coverage-guided

The default engine draws cases from every family of ``fuzz_cases.py`` (damaged
WAV/FLAC/AIFF headers, random bytes, CSV in every dialect, random text,
recipes, ``bands``/``clean``/``events`` runs) and runs each in a worker
process (``fuzz_harness.py``) that a hang or a hard crash cannot take down.
Every case is reproducible from its family and number: ``--replay FAMILY:N``
runs one again and prints what it did.

The ``atheris`` engine (``pip install atheris``) lets libFuzzer mutate the
bytes itself, guided by the coverage of the readers and the recipe loader; it
runs in this process, so a crash stops it with libFuzzer's report.

At the end one JSON summary goes to stdout: cases, outcomes, distinct error
messages (and kinds of message, with file names, numbers and quoted values
blanked), crashes, hangs, huge allocations and the first failures with the
case that reproduces each.  Exit status 1 when anything failed.
"""

from __future__ import annotations

import argparse
import json
import os
import random
import shutil
import sys
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

import fuzz_cases  # noqa: E402
from fuzz_harness import CaseRunner, Tally  # noqa: E402


def run_random(args) -> dict:
    seed = args.seed if args.seed is not None else random.SystemRandom().randrange(1 << 30)
    rng = random.Random(seed)
    deadline = time.monotonic() + 60.0 * args.minutes
    tally = Tally()
    per_family: dict[str, Tally] = {}
    start = time.monotonic()
    last_note = start
    with CaseRunner(timeout_s=args.timeout) as runner:
        n = 0
        while time.monotonic() < deadline and (args.cases is None or n < args.cases):
            family = fuzz_cases.pick_family(rng)
            number = rng.randrange(1 << 40)
            target, data, suffix, options = fuzz_cases.make_case(family, number)
            outcome = runner.run(target, data, suffix, options)
            case = f"{family}:{number}"
            tally.add(outcome, case)
            per_family.setdefault(family, Tally()).add(outcome, case)
            if outcome.failed:
                print(f"FAILURE {outcome.kind} in {case}: {outcome.message[:300]}",
                      file=sys.stderr)
            n += 1
            if time.monotonic() - last_note > 30:
                last_note = time.monotonic()
                print(f"{n} cases, {len(tally.messages)} distinct messages, "
                      f"{len(tally.failures)} failures", file=sys.stderr)
        restarts = runner.restarts
    summary = tally.summary()
    summary.update({
        "engine": "random", "seed": seed, "seconds": round(time.monotonic() - start, 1),
        "worker_restarts": restarts,
        "families": {name: {"cases": t.cases, "outcomes": dict(t.outcomes),
                            "distinct_messages": len(t.messages)}
                     for name, t in sorted(per_family.items())},
    })
    if args.messages:
        summary["message_kinds"] = dict(tally.templates.most_common())
    return summary


def run_atheris(args) -> dict:  # pragma: no cover - needs atheris
    import tempfile

    import atheris

    with atheris.instrument_imports():
        import scalesieve.io.csv_reader  # noqa: F401
        import scalesieve.io.readers as readers
        import scalesieve.recipe as recipe
    from scalesieve.errors import ScalesieveError

    folder = tempfile.mkdtemp(prefix="scalesieve-atheris-")
    suffixes = [".wav", ".flac", ".aiff", ".csv", ".txt", ".json"]
    tally = Tally()
    start = time.monotonic()

    deadline = start + 60.0 * args.minutes

    def one(data: bytes) -> None:
        if time.monotonic() > deadline:
            # libFuzzer ends with C exit(), which skips Python's atexit: report here.
            report()
            shutil.rmtree(folder, ignore_errors=True)
            os._exit(0)
        if not data:
            return
        suffix = suffixes[data[0] % len(suffixes)]
        path = os.path.join(folder, "case" + suffix)
        with open(path, "wb") as fh:
            fh.write(data[1:])
        from fuzz_harness import Outcome

        try:
            if suffix == ".json":
                recipe.load(path)
            else:
                readers.read_recording(path)
            tally.add(Outcome("loaded"))
        except ScalesieveError as err:
            tally.add(Outcome("error", err.one_line()))

    def report():
        summary = tally.summary()
        summary["failures"] = []  # an uncaught exception stops atheris before this
        summary.update({"engine": "atheris", "seconds": round(time.monotonic() - start, 1),
                        "note": "an uncaught exception stops atheris with its own report"})
        print(json.dumps(summary, indent=1), flush=True)

    seeds = os.path.join(folder, "corpus")
    os.makedirs(seeds)
    for family in ("wav_header", "flac_header", "aiff_header", "csv_dialects", "recipe"):
        for k in range(8):
            _, data, suffix, _ = fuzz_cases.make_case(family, k)
            tag = suffixes.index(suffix) if suffix in suffixes else 0
            with open(os.path.join(seeds, f"{family}-{k}"), "wb") as fh:
                fh.write(bytes([tag]) + data)
    argv = [sys.argv[0], seeds, f"-max_total_time={int(60 * args.minutes) + 120}",
            f"-timeout={int(args.timeout)}", "-rss_limit_mb=4096", "-print_final_stats=1"]
    atheris.Setup(argv, one)
    atheris.Fuzz()
    return {}


def replay(case: str, timeout: float) -> dict:
    family, _, number = case.partition(":")
    target, data, suffix, options = fuzz_cases.make_case(family, int(number))
    with CaseRunner(timeout_s=timeout) as runner:
        o = runner.run(target, data, suffix, options)
    return {"case": case, "target": target, "suffix": suffix, "options": options,
            "bytes": len(data), "outcome": o.kind, "message": o.message,
            "peak_bytes": o.peak_bytes, "seconds": round(o.seconds, 4)}


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--minutes", type=float, default=10.0, help="how long to run (default 10)")
    p.add_argument("--cases", type=int, default=None, help="stop after this many cases")
    p.add_argument("--seed", type=int, default=None, help="seed of the case sequence")
    p.add_argument("--timeout", type=float, default=30.0,
                   help="seconds one case may take before it counts as a hang (default 30)")
    p.add_argument("--engine", choices=("random", "atheris"), default="random")
    p.add_argument("--messages", action="store_true",
                   help="list every kind of error message with its count")
    p.add_argument("--replay", metavar="FAMILY:N", help="run one case again")
    args = p.parse_args(argv)
    if args.replay:
        print(json.dumps(replay(args.replay, args.timeout), indent=1))
        return 0
    if args.engine == "atheris":
        run_atheris(args)
        return 0
    summary = run_random(args)
    print(json.dumps(summary, indent=1))
    failed = summary["crashes"] + summary["hangs"] + summary["huge_allocations"]
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
