"""The Python scripting API: the same steps the window and the command line take.

Example
-------
>>> import scalesieve.api as ss
>>> rec = ss.load("sample_signals/pump_bearing.wav")            # doctest: +SKIP
>>> model = ss.build_model(rec, ss.load_recipe("r.json"))        # doctest: +SKIP
>>> model.add_edit(ss.Edit("gain", levels=(1,), gain=0.0))       # doctest: +SKIP
>>> ss.export(model, "cleaned.wav")                              # doctest: +SKIP
"""

from __future__ import annotations

import os
from dataclasses import replace
from typing import Sequence

import numpy as np

from scalesieve.core.recording import Recording
from scalesieve.core.transforms import TransformSpec
from scalesieve.errors import ScalesieveError
from scalesieve.model import DecompositionModel
from scalesieve.recipe import Edit, Recipe
from scalesieve.recipe import load as load_recipe
from scalesieve.recipe import parse_levels

__all__ = ["load", "load_recipe", "build_model", "export", "Edit", "Recipe", "TransformSpec",
           "DecompositionModel", "Recording", "parse_levels", "merge_transform", "save_recipe",
           "clean", "check_target"]


def load(path: str | os.PathLike, *, rate: float | None = None,
         channel: int | str | None = None, fill_gaps: str | None = None, dtype=np.float64,
         group: str | None = None, dataset: str | None = None) -> Recording:
    """Read a recording: WAV/FLAC/AIFF/OGG, CSV/TSV/TXT, TDMS, EDF/BDF, MATLAB, HDF5,
    MDF 4 or Excel (see ``scalesieve.io.readers.read_recording``)."""
    from scalesieve.io.readers import read_recording

    return read_recording(os.fspath(path), rate=rate, channel=channel, fill_gaps=fill_gaps,
                          dtype=dtype, group=group, dataset=dataset)


def merge_transform(recipe_spec: TransformSpec | None, kind: str | None = None,
                    wavelet: str | None = None, level: int | None = None,
                    mode: str | None = None, basis=None, cost: str | None = None) -> TransformSpec:
    """Defaults, then the recipe's own transform, then explicit options (which win)."""
    spec = recipe_spec or TransformSpec()
    over = {k: v for k, v in (("kind", kind), ("wavelet", wavelet), ("level", level),
                              ("mode", mode), ("basis", basis), ("cost", cost))
            if v is not None}
    return replace(spec, **over)


def build_model(recording: Recording, recipe: Recipe | None = None,
                transform: TransformSpec | None = None, edits: Sequence[Edit] = (),
                progress=None) -> DecompositionModel:
    """A model of ``recording`` with the recipe's transform and edits, then ``edits``.

    ``transform`` replaces the recipe's transform when given.
    """
    spec = transform or (recipe.transform if recipe is not None else None) or TransformSpec()
    all_edits = tuple(recipe.edits if recipe is not None else ()) + tuple(edits)
    _check_fits(recording, spec)
    try:
        return DecompositionModel(recording, spec, all_edits, progress=progress)
    except ScalesieveError as exc:
        if exc.source is None:
            exc.source = recording.source or None
        raise


def _check_fits(recording: Recording, spec: TransformSpec) -> None:
    """Refuse, before any work, what the transform cannot take, with advice that fits.

    The readers refuse NaN, infinite and absurdly large samples already and
    say so in ``meta["samples_checked"]``; a Recording made in a script is
    scanned here (one pass over its samples).
    """
    from scalesieve.core import transforms as tf
    from scalesieve.io.input_check import MAX_ABS_SAMPLE, first_unusable

    source = recording.source or None
    try:
        spec.validate()
    except ValueError as exc:
        raise ScalesieveError(str(exc), source) from None
    n = recording.n
    if n < 2:
        raise ScalesieveError(
            f"holds {n} sample{'' if n == 1 else 's'}; a wavelet transform needs at least 2 "
            "(with haar), and more for longer filters", source)
    if tf.max_level(n, spec.wavelet) < 1:
        length = tf.filter_length(spec.wavelet)
        # One level needs n / (L - 1) >= 2 (PyWavelets' dwt_max_level).
        raise ScalesieveError(
            f"{n} samples are too few for wavelet {spec.wavelet} (filter length {length}: one "
            f"level needs at least {2 * (length - 1)} samples); use haar or another short "
            "wavelet, or a longer recording", source)
    # Our readers checked their samples already; a Recording made in code is scanned.
    first = None if recording.meta.get("samples_checked") else first_unusable(recording.samples)
    if first is not None:
        r, c = first
        v = float(recording.samples[r, c])
        what = ("NaN" if np.isnan(v) else "infinite" if np.isinf(v) else
                f"{v:.3g}, beyond ±{MAX_ABS_SAMPLE:g}, too large to analyse")
        raise ScalesieveError(f"sample {r} of channel {c} is {what}; fill, fix or remove it "
                              "first", source)
    if not (recording.rate > 0 and np.isfinite(recording.rate)):
        raise ScalesieveError(f"sampling rate {recording.rate!r} must be a positive number of "
                              "Hz", source)


def export(model: DecompositionModel, path: str | os.PathLike, what: str = "cleaned", *,
           subtype: str | None = None, force: bool = False,
           protect: Sequence[str] = ()) -> dict:
    """Write the cleaned (or removed) signal; returns the writer's report.

    The model is settled first, so the samples are bit-identical to those of
    a freshly built model (what ``scalesieve clean`` writes).
    """
    from scalesieve.io.writers import write_signal

    if what not in ("cleaned", "removed"):
        raise ValueError(f"what must be 'cleaned' or 'removed', not {what!r}")
    rec = model.recording
    p = os.fspath(path)
    check_target(p, force, list(protect) + ([rec.source] if rec.source else []))
    model.settle()
    if rec.channels == 1:
        # one channel: its own array as a column, not a copy (the writer only reads)
        data = (model.cleaned(0) if what == "cleaned" else model.removed(0))[:, None]
    else:
        data = model.cleaned() if what == "cleaned" else model.removed()
    return write_signal(p, data, rec.rate, rec.channel_names, like=rec, subtype=subtype,
                        force=force)


def save_recipe(model_or_recipe, path: str | os.PathLike, force: bool = False) -> None:
    from scalesieve.io.writers import write_json

    recipe = model_or_recipe.recipe() if isinstance(model_or_recipe, DecompositionModel) \
        else model_or_recipe
    write_json(os.fspath(path), recipe.to_json(), force=force)


def check_target(path: str, force: bool = False, protect: Sequence[str] = (), *,
                 inputs: Sequence[str] | None = None) -> None:
    """Refuse before any work: a file in ``protect`` (the inputs), a folder, a missing
    folder, or an existing file without ``force`` (``scalesieve.io.atomic.check_target``).

    ``inputs`` is the earlier name of ``protect`` (kept working).
    """
    from scalesieve.io.atomic import check_target as _check

    _check(path, force=force, protect=list(protect) + list(inputs or ()))


def clean(path: str | os.PathLike, output: str | os.PathLike, recipe: Recipe | None = None, *,
          transform: TransformSpec | None = None, edits: Sequence[Edit] = (),
          removed: str | os.PathLike | None = None, subtype: str | None = None,
          force: bool = False, rate: float | None = None, channel: int | str | None = None,
          fill_gaps: str | None = None, group: str | None = None,
          dataset: str | None = None) -> dict:
    """Clean one recording into ``output``: what ``scalesieve clean`` does, same files.

    The one pipeline for one file (``scalesieve.pipeline.clean_file``): the
    memory guard, then the recording read whole or in blocks, the recipe and
    ``edits`` applied, the cleaned (and, with ``removed``, the removed) signal
    written.  Returns the report (``samples``, ``channels``, ``rate``,
    ``outputs``, ``clipped``, ``energy_removed_fraction``, ``recipe`` as
    applied, ``warnings``).
    """
    from scalesieve.pipeline import clean_file

    return clean_file(os.fspath(path), os.fspath(output), recipe=recipe, transform=transform,
                      edits=tuple(edits), removed=os.fspath(removed) if removed else None,
                      subtype=subtype, force=force, rate=rate, channel=channel,
                      fill_gaps=fill_gaps, group=group, dataset=dataset)
