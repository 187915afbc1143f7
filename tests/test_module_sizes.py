"""No module of the package is over 700 lines (a module has one job; common practice)."""

import os

APP = os.path.join(os.path.dirname(__file__), "..", "app", "scalesieve")


def test_no_module_over_700_lines():
    long = []
    for folder, _, files in os.walk(APP):
        for name in files:
            if name.endswith(".py"):
                path = os.path.join(folder, name)
                with open(path, encoding="utf-8") as fh:
                    count = sum(1 for _ in fh)
                if count > 700:
                    long.append((os.path.relpath(path, APP), count))
    assert not long, long
