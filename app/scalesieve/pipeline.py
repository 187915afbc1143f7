"""One recording cleaned: guard, read, model (or blocks), export, figures.

This is the one pipeline for one file.  ``scalesieve clean``, every file of
``scalesieve batch`` and :func:`scalesieve.api.clean` call :func:`clean_file`,
so all three write identical files and report the same figures:

1. the memory guard (:func:`guard`) probes the input and refuses a recording
   that would not fit even in blocks;
2. a recording past the budget runs block by block
   (``scalesieve.stream.pipeline.clean_stream``), the others are read whole,
   modelled and exported through :mod:`scalesieve.api`;
3. the report's figures (:func:`removed_energy_fraction`) are computed here
   and nowhere else for a whole-array clean.

:func:`clean_in_pieces` is the same job cut in time pieces for several
workers (``clean --workers`` / ``--scheduler``).
"""

from __future__ import annotations

import os
from typing import Sequence

import numpy as np

from scalesieve.core.transforms import TransformSpec
from scalesieve.errors import ScalesieveError
from scalesieve.recipe import Edit, Recipe


def guard(input_path: str, *, channel: int | str | None = None,
          transform: TransformSpec | None = None, outputs: Sequence[str] = (),
          fill_gaps: str | None = None) -> dict | None:
    """The memory guard for a clean of ``input_path`` writing ``outputs``.

    Returns the probe's facts (``"in_blocks"`` among them when the clean runs
    block by block), or None when the file was not probed (see
    ``memory_guard.check``).

    Raises
    ------
    ScalesieveError
        When the recording would not fit in memory, not even in blocks.
    """
    from scalesieve import memory_guard

    return memory_guard.check(input_path, channel=channel, transform=transform,
                              outputs=list(outputs), fill_gaps=fill_gaps, packets=True)


def removed_energy_fraction(samples: np.ndarray, model) -> float:
    """Energy of what the model removed over the input's, all channels pooled.

    Only the two energies the summary needs, in blocked passes over each
    channel (no full-length temporaries, not the model's per-band metrics).
    """
    from scalesieve.core.band_figures import signal_energy
    from scalesieve.core.metrics import removed_energy as energy_of_difference

    x = samples if samples.ndim == 2 else samples[:, None]
    removed = sum(energy_of_difference(x[:, k], model.cleaned(k)) for k in range(x.shape[1]))
    total = sum(signal_energy(x[:, k]) for k in range(x.shape[1]))
    return removed / total if total > 0 else 0.0


def clean_file(input_path: str, output: str, *, recipe: Recipe | None = None,
               transform: TransformSpec | None = None, edits: Sequence[Edit] = (),
               removed: str | None = None, subtype: str | None = None, force: bool = False,
               rate: float | None = None, channel: int | str | None = None,
               fill_gaps: str | None = None, progress=None, group: str | None = None,
               dataset: str | None = None, facts: dict | None = None,
               guarded: bool = False) -> dict:
    """Read ``input_path``, apply the recipe and edits, write the cleaned signal.

    Parameters
    ----------
    input_path, output : str
        The recording (never overwritten) and the cleaned file to write; the
        format follows the extension.
    recipe : Recipe, optional
        Its edits apply first, then ``edits``.
    transform : TransformSpec, optional
        The transform to use (already merged: defaults, recipe, options);
        ``None`` takes the recipe's own, else the defaults.
    removed : str, optional
        Also write what was removed here.
    subtype, force, rate, channel, fill_gaps, group, dataset
        As the command-line options of the same names.
    progress : callable(fraction, text), optional
        Told how far the decomposition has got (the command line's bar).
    facts, guarded
        What :func:`guard` returned, when the caller ran it already
        (``guarded=True``); otherwise the guard runs here.

    Returns
    -------
    dict
        ``samples``, ``channels``, ``rate``, ``outputs`` (the writers'
        reports, cleaned first), ``clipped`` (total samples clipped by
        integer-PCM export), ``energy_removed_fraction`` (removed energy
        over the input's, all channels pooled), ``recipe`` (as applied) and
        ``warnings``.

    Raises
    ------
    ScalesieveError
        For a recording too large for memory, a target that may not be
        written, unreadable input, or a recipe that does not fit the recording.
    """
    from scalesieve import api

    outputs = [output] + ([removed] if removed else [])
    spec = transform or (recipe.transform if recipe is not None else None)
    if not guarded:
        facts = guard(input_path, channel=channel, transform=spec, outputs=outputs,
                      fill_gaps=fill_gaps)
    if facts is not None and "in_blocks" in facts:
        # longer than the budget: the same numbers, block by block
        from scalesieve.stream.pipeline import clean_stream

        return clean_stream(input_path, output, recipe=recipe, transform=transform,
                            edits=edits, removed=removed, subtype=subtype, force=force,
                            rate=rate, channel=channel, fill_gaps=fill_gaps, progress=progress,
                            group=group, dataset=dataset)
    if len(outputs) == 2 and os.path.realpath(outputs[0]) == os.path.realpath(outputs[1]):
        raise ScalesieveError("-o and --removed name the same file", output)
    for out in outputs:
        api.check_target(out, force, [input_path])
    rec = api.load(input_path, rate=rate, channel=channel, fill_gaps=fill_gaps, group=group,
                   dataset=dataset)
    model = api.build_model(rec, recipe, transform=transform, edits=tuple(edits),
                            progress=progress)
    if removed:
        reports = _export_both(api, model, output, removed, subtype, force, input_path)
    else:
        reports = [api.export(model, output, "cleaned", subtype=subtype, force=force,
                              protect=[input_path])]
    return {
        "samples": rec.n,
        "channels": rec.channels,
        "rate": rec.rate,
        "outputs": reports,
        "clipped": int(sum(int(r.get("clipped") or 0) for r in reports)),
        "energy_removed_fraction": removed_energy_fraction(rec.samples, model),
        "recipe": model.recipe(),          # as applied: level and basis resolved
        "warnings": list(rec.warnings),
    }


def _export_both(api, model, output: str, removed: str, subtype, force: bool,
                 input_path: str) -> list[dict]:
    """Cleaned and removed signals: both files appear, or neither (a full disk mid-way)."""
    from scalesieve.io.atomic import atomic_targets

    with atomic_targets([output, removed], force=force, protect=[input_path]) as temps:
        reports = []
        for what, tmp, target in (("cleaned", temps[0], output), ("removed", temps[1], removed)):
            try:
                rep = api.export(model, tmp, what, subtype=subtype, force=True,
                                 protect=[input_path])
            except ScalesieveError as exc:
                # The user knows the target, not our temporary name for it.
                exc.message = exc.message.replace(tmp, target)
                if exc.source == tmp:
                    exc.source = target
                raise
            reports.append({**rep, "path": target})
    return reports


def clean_in_pieces(input_path: str, output: str, *, workers: int | None = None,
                    scheduler: str | None = None, pieces: int | None = None,
                    recipe: Recipe | None = None, transform: TransformSpec,
                    edits: Sequence[Edit] = (), removed: str | None = None,
                    subtype: str | None = None, force: bool = False,
                    rate: float | None = None, channel: int | str | None = None,
                    fill_gaps: str | None = None, progress=None, group: str | None = None,
                    dataset: str | None = None) -> dict:
    """:func:`clean_file` with the recording cut in time pieces for several workers.

    ``workers`` local processes or the Dask cluster at ``scheduler``; the
    pieces are cleaned in blocks and joined, with the samples of the
    one-process run.

    Raises
    ------
    ScalesieveError
        When the recording cannot be worked on in blocks (and why).
    """
    from dataclasses import replace

    from scalesieve import memory_guard
    from scalesieve.core.transforms import default_level
    from scalesieve.stream.pieces import clean_pieces
    from scalesieve.stream.choice import not_streamable
    from scalesieve.stream.wrap import WRAP_MODES

    outputs = [output] + ([removed] if removed else [])
    facts = memory_guard.probe_quietly(input_path)
    resolved = transform
    if facts is not None and transform.level is None:
        resolved = replace(transform,
                           level=default_level(max(int(facts["frames"]), 2), transform.wavelet))
    why = not_streamable(facts, resolved, outputs, fill_gaps, channel, packets=True)
    if why is None and facts.get("kind") == "text":
        # each worker would parse the whole table again to find its piece's rows
        why = "a text table is parsed in one process only"
    elif why is None and resolved.kind == "packet" and resolved.mode in WRAP_MODES:
        # the pieces cut the packet tree of the modes that extend the signal from its edge
        why = (f"wavelet packets in boundary mode {resolved.mode} are cleaned in blocks in "
               "one process only")
    if why is not None:
        raise ScalesieveError(f"--workers and --scheduler clean in blocks, and this cannot be: "
                              f"{why}", input_path)
    return clean_pieces(input_path, output, workers=workers, scheduler=scheduler,
                        pieces=pieces, recipe=recipe, transform=transform, edits=edits,
                        removed=removed, subtype=subtype, force=force, rate=rate,
                        channel=channel, fill_gaps=fill_gaps, progress=progress, group=group,
                        dataset=dataset)
