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


#: channel units and name words that suggest a physiological trace
_BIO_UNITS = ("mV", "uV", "µV", "μV")
_BIO_WORDS = re.compile(r"(?<![A-Za-z])(ECG|EKG|EEG|EMG|EOG|EDA|PPG|GSR)(?![a-z])", re.I)
#: the one-line caution shown when such a recording is opened
RESEARCH_CAUTION = ("Physiological traces: Scalesieve is for research and teaching, "
                    "not for diagnosis or treatment.")


def looks_physiological(channel_names, source: str | None = None) -> bool:
    """A channel in mV/µV, a name like ECG/EEG/EMG, or an EDF/BDF file."""
    if source and str(source).lower().endswith((".edf", ".bdf")):
        return True
    for name in channel_names or ():
        if unit_of(name) in _BIO_UNITS or _BIO_WORDS.search(name or ""):
            return True
    return False
