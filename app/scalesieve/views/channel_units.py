"""The unit a channel name carries (``signal_mV`` → mV, ``strain [µm/m]`` → µm/m).

Only a suffix that is a known unit counts, so ``strain_A`` (a channel letter)
is not taken for amperes: a bare one-letter suffix needs brackets.
"""

from __future__ import annotations

import re

#: units recognised after an underscore or a space (case as written)
UNITS = ("mV", "uV", "µV", "μV", "kV", "mA", "uA", "µA", "Pa", "kPa", "MPa", "hPa", "bar",
         "mbar", "psi", "kN", "Nm", "m/s2", "m/s²", "mm/s", "m/s", "mm", "um", "µm", "μm",
         "ue", "µe", "µε", "με", "um/m", "µm/m", "μm/m", "degC", "°C", "K", "dB", "rpm", "Hz",
         "kg", "mg", "ms", "mmHg", "cmH2O", "mg/dl")
#: one-letter units, only inside brackets or parentheses
BRACKETED = ("V", "A", "g", "N", "m", "s", "%", "W")

_BRACKET = re.compile(r"[\[(]\s*([^\])]+?)\s*[\])]\s*$")
_SUFFIX = re.compile(r"[_\s]([A-Za-z°µμ/%²0-9]+)$")


def unit_of(name: str) -> str:
    """The unit in a channel name, or "" when it gives none."""
    name = (name or "").strip()
    m = _BRACKET.search(name)
    if m and (m.group(1) in UNITS or m.group(1) in BRACKETED):
        return m.group(1)
    m = _SUFFIX.search(name)
    if m and m.group(1) in UNITS:
        return m.group(1)
    return ""
