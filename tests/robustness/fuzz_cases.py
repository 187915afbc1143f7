"""The fuzz catalogue: families of cases, each a target and a way to make its input.

Shared by the bounded tests (``test_fuzz_inputs.py``) and the on-demand long
run (``fuzz_long.py``), so both fuzz the same things.  A family's maker takes
a :class:`random.Random` and returns ``(target, data, suffix, options)`` for
:meth:`fuzz_harness.CaseRunner.run`.
"""

from __future__ import annotations

import random

import damaged_inputs as di


def _read_options(rng: random.Random, text: bool) -> dict:
    opts: dict = {}
    if rng.random() < 0.25:
        opts["rate"] = rng.choice([1.0, 1000.0, 1e6, 48000.0])
    if rng.random() < 0.15:
        opts["channel"] = rng.choice([0, 1, 3, 31])
    if rng.random() < 0.25:
        opts["fill_gaps"] = "linear"
    if rng.random() < 0.1:
        opts["dtype"] = "float32"
    return opts


def _audio(kinds):
    def make(rng: random.Random):
        data, suffix = di.damaged_audio(rng, rng.choice(kinds))
        return "read", data, suffix, _read_options(rng, False)
    return make


def _random_bytes(rng):
    data, suffix = di.random_bytes(rng)
    return "read", data, suffix, _read_options(rng, False)


def _csv(rng):
    data, suffix, _ = di.csv_table(rng)
    return "read", data, suffix, _read_options(rng, True)


def _text(rng):
    data, suffix = di.random_text(rng)
    return "read", data, suffix, _read_options(rng, True)


def _probe(rng):
    if rng.random() < 0.5:
        data, suffix = di.damaged_audio(rng)
    else:
        data, suffix, _ = di.csv_table(rng)
    return "probe", data, suffix, {}


def _recipe(rng):
    data, suffix = di.recipe_bytes(rng)
    return "recipe", data, suffix, {}


def _cli_input(rng):
    # A third undamaged, so the commands also run their whole way on odd recordings.
    if rng.random() < 0.5:
        return di.valid_audio(rng) if rng.random() < 0.33 else di.damaged_audio(rng)
    data, suffix, _ = di.csv_table(rng)
    return data, suffix


def _cli_bands(rng):
    data, suffix = _cli_input(rng)
    argv = ["bands", "{path}"] + rng.choice([[], ["--json"], ["--rate", "100"],
                                             ["--wavelet", "haar", "--level", "3"],
                                             ["--transform", "swt", "--json"],
                                             ["--channel", "1"], ["--fill-gaps", "linear"]])
    return "cli", data, suffix, {"argv": argv}


def _cli_clean(rng):
    data, suffix = _cli_input(rng)
    out = rng.choice(["out.wav", "out.csv", "out.flac"])
    argv = ["clean", "{path}", "-o", out, "--force"] + \
        rng.choice([["--zero", "1"], ["--threshold", "universal"], ["--zero", "a"],
                    ["--threshold", "bayes", "--noise", "level", "--transform", "swt"],
                    ["--zero", "1-3", "--rate", "1000"]])
    return "cli", data, suffix, {"argv": argv}


def _cli_events(rng):
    data, suffix = _cli_input(rng)
    return "cli", data, suffix, {"argv": ["events", "{path}", "--json"]}


def _measurement(rng):
    data, suffix = di.damaged_measurement(rng)
    return "read", data, suffix, _read_options(rng, False)


def _cli_measurement(rng):
    data, suffix = di.damaged_measurement(rng)
    argv = ["clean", "{path}", "-o", rng.choice(["out.wav", "out.csv"]), "--force",
            "--zero", "1", "--wavelet", "haar", "--level", "1"]
    return "cli", data, suffix, {"argv": argv}


def _numpy(rng):
    data, suffix = di.numpy_file(rng)
    return "read", data, suffix, _read_options(rng, False)


#: name -> (weight, maker)
FAMILIES = {
    "wav_header": (4, _audio(["wav16", "wav8", "wav24", "wavfloat", "wavdouble", "wavex"])),
    "flac_header": (3, _audio(["flac"])),
    "aiff_header": (3, _audio(["aiff", "aifc"])),
    "other_audio": (1, _audio(["au", "w64", "caf"])),
    "random_bytes": (2, _random_bytes),
    "csv_dialects": (4, _csv),
    "csv_random_text": (2, _text),
    "probe": (1, _probe),
    "recipe": (4, _recipe),
    "cli_bands": (1, _cli_bands),
    "cli_clean": (1, _cli_clean),
    "cli_events": (1, _cli_events),
    "measurement_formats": (2, _measurement),
    "cli_measurement": (1, _cli_measurement),
    "numpy_files": (1, _numpy),
}


def pick_family(rng: random.Random) -> str:
    names = list(FAMILIES)
    return rng.choices(names, weights=[FAMILIES[n][0] for n in names])[0]


def make_case(family: str, seed: int):
    """The case of ``family`` for ``seed``: the same seed always gives the same bytes."""
    rng = random.Random(f"{family}:{seed}")
    return FAMILIES[family][1](rng)
