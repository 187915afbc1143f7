"""Band keys and their names: DWT/SWT levels (``"a"``, J .. 1) and packet bands (``PacketKey``).

The keys of a transform in coefficient-list and table order, a key's name as
``bands --json`` lists it, and the key of a name (cached: the window resolves
every edit's band names for each band header it redraws).
"""

from __future__ import annotations

from functools import lru_cache


def basis_paths(spec: TransformSpec) -> tuple[str, ...]:
    """Node paths of a packet spec's basis in frequency order ("best" must be chosen first)."""
    from scalesieve.core import packets as wp

    if spec.basis == "full":
        return wp.full_basis(spec.level)
    if isinstance(spec.basis, str):
        raise ValueError("the best basis is chosen from the data (model or packets.best_basis)")
    return tuple(spec.basis)


def spec_keys(spec: TransformSpec) -> list:
    """Band keys in coefficient-list order (PyWavelets order for DWT/SWT)."""
    if spec.kind == "packet":
        from scalesieve.core import packets as wp

        return wp.keys(basis_paths(spec))
    return band_keys(spec.level)


def table_keys(spec: TransformSpec) -> list:
    """Band keys in table order: d1 ... dJ, aJ; packet bands in frequency order."""
    if spec.kind == "packet":
        return spec_keys(spec)
    return list(range(1, spec.level + 1)) + ["a"]


def key_named(spec: TransformSpec, name: str):
    """The band key of a name as ``bands --json`` lists it; ValueError naming the bands."""
    try:
        named = _keys_by_name(spec)
    except TypeError:       # a spec holding a list (unhashable): look through the keys
        named = {band_name(k, spec.level): k for k in table_keys(spec)}
    if name in named:
        return named[name]
    names = [band_name(k, spec.level) for k in table_keys(spec)]
    shown = ", ".join(names) if len(names) <= 12 else ", ".join(names[:3] + ["…"] + names[-2:])
    raise ValueError(f"band {name!r} is not in the transform (its bands: {shown})")


@lru_cache(maxsize=64)
def _keys_by_name(spec: TransformSpec) -> dict:
    # cached: the window resolves every edit's band names for each band header it
    # redraws (64 packet bands: thousands of look-ups per click); the first key of a name wins
    named: dict = {}
    for key in table_keys(spec):
        named.setdefault(band_name(key, spec.level), key)
    return named


def band_keys(level: int) -> list:
    """Band keys in PyWavelets order: ``["a", J, J-1, ..., 1]``."""
    return ["a"] + list(range(level, 0, -1))


def band_name(key, level: int) -> str:
    if hasattr(key, "path"):
        return key.name
    return f"a{level}" if key == "a" else f"d{key}"


def band_index(key, level: int) -> int:
    """Position of a band key in the PyWavelets coefficient list."""
    if hasattr(key, "path"):
        return key.position
    return 0 if key == "a" else level - int(key) + 1
