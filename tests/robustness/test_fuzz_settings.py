"""CI fuzzing is reproducible; the randomized campaign is asked for by name.

Checked on the settings Hypothesis itself attaches to each ``@given`` test
(``_hypothesis_internal_use_settings``), with the test modules imported in a
fresh interpreter under the environment CI (or the campaign) sets.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys

import pytest

TESTS = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
FUZZ_MODULES = ["test_fuzz_inputs", "test_recipe_checks", "test_edge_cases", "test_recipe_schema"]

_PROBE = r"""
import importlib, json, os, sys
sys.path[:0] = [{tests!r}, os.path.join({tests!r}, "robustness")]
import conftest  # noqa: F401  (loads the profile, as pytest does first)
out = {{}}
for name in {modules!r}:
    try:
        mod = importlib.import_module(name)
    except ImportError:
        continue
    for attr, fn in vars(mod).items():
        s = getattr(fn, "_hypothesis_internal_use_settings", None)
        if s is not None:
            out[name + "." + attr] = [bool(s.derandomize), int(s.max_examples)]
print(json.dumps(out))
"""


def _settings_under(env: dict) -> dict:
    base = {k: v for k, v in os.environ.items()
            if k not in ("CI", "SCALESIEVE_FUZZ_EXAMPLES")}
    code = _PROBE.format(tests=TESTS, modules=FUZZ_MODULES)
    done = subprocess.run([sys.executable, "-c", code], env={**base, **env},
                          capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr[-2000:]
    return json.loads(done.stdout.strip().splitlines()[-1])


def test_ci_draws_fixed_examples_in_every_fuzz_test():
    found = _settings_under({"CI": "true"})
    assert len(found) >= 7          # the fuzz tests of test_fuzz_inputs.py at least
    random_ones = sorted(name for name, (derandomized, _) in found.items() if not derandomized)
    assert random_ones == []


def test_the_campaign_draws_fresh_examples_with_the_count_asked_for():
    found = _settings_under({"CI": "true", "SCALESIEVE_FUZZ_EXAMPLES": "321"})
    assert found
    assert all(not derandomized and n == 321 for derandomized, n in found.values()), found


@pytest.mark.parametrize("bad", ["many", "0"])
def test_a_bad_campaign_count_is_refused_in_one_line(bad):
    base = {k: v for k, v in os.environ.items() if k != "SCALESIEVE_FUZZ_EXAMPLES"}
    code = f"import sys; sys.path.insert(0, {TESTS!r}); import conftest"
    done = subprocess.run([sys.executable, "-c", code],
                          env={**base, "SCALESIEVE_FUZZ_EXAMPLES": bad},
                          capture_output=True, text=True, timeout=60)
    assert done.returncode != 0
    assert "SCALESIEVE_FUZZ_EXAMPLES" in done.stderr and "Traceback" not in done.stderr
