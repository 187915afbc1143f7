"""How many examples the fuzz tests draw, and whether they are the same each run.

CI (``CI`` set) loads the ``ci`` profile: derandomized, so every run draws the
same examples and a failure replays.  The long randomized campaign is asked for
with ``SCALESIEVE_FUZZ_EXAMPLES=N`` (``.ci/fuzz-campaign N`` sets it): fresh
examples, ``N`` per fuzz test.  The fuzz tests take their counts from
:func:`examples` and never set ``derandomize`` themselves, so the profile decides.
"""

from __future__ import annotations

import os

#: Environment variable: run the randomized campaign with this many examples per test.
CAMPAIGN_ENV = "SCALESIEVE_FUZZ_EXAMPLES"


def campaign_count() -> int | None:
    """The campaign's examples per test, or None when no campaign was asked for."""
    text = os.environ.get(CAMPAIGN_ENV, "").strip()
    if not text:
        return None
    try:
        n = int(text)
    except ValueError:
        raise SystemExit(f"{CAMPAIGN_ENV} must be a whole number of examples, not {text!r}")
    if n < 1:
        raise SystemExit(f"{CAMPAIGN_ENV} must be at least 1, not {n}")
    return n


def examples(default: int) -> int:
    """Examples one fuzz test draws: its own bounded count, or the campaign's."""
    n = campaign_count()
    return default if n is None else n
