"""MATLAB (.mat v5 through SciPy, v7.3 as HDF5) and HDF5 files (h5py) as a ``Source``.

Part of the measurement readers (``scalesieve.io.measurement_readers``): which
numeric variable or dataset (``--dataset``), its rate from a scalar or an
attribute named ``fs``, ``rate`` or ``sample_rate``, and a v5 file's declared
sizes checked against the file before SciPy allocates them.
"""

from __future__ import annotations

import os
import warnings

import numpy as np

from scalesieve.errors import ScalesieveError
from scalesieve.io.measurement_readers import (RATE_NAMES, Source, _CappedFile, _choose,
                                               _library, _reason)


def _hdf5_rate(obj, f) -> float | None:
    for holder in (obj, obj.parent, f):
        for key, value in holder.attrs.items():
            if key.lower() in RATE_NAMES:
                try:
                    v = float(np.asarray(value).ravel()[0])
                except (TypeError, ValueError, IndexError):
                    continue
                if v > 0 and np.isfinite(v):
                    return v
    for key in f.keys():
        if key.lower() in RATE_NAMES:
            try:
                v = float(np.asarray(f[key][()]).ravel()[0])
            except (TypeError, ValueError, IndexError, AttributeError):
                continue
            if v > 0 and np.isfinite(v):
                return v
    return None


def _text_attr(obj, *keys) -> str | None:
    for key in keys:
        if key in obj.attrs:
            v = obj.attrs[key]
            if isinstance(v, bytes):
                return v.decode("utf-8", "replace")
            if isinstance(v, str):
                return v
            arr = np.asarray(v)
            if arr.size == 1:
                item = arr.ravel()[0]
                return item.decode("utf-8", "replace") if isinstance(item, bytes) else str(item)
    return None


def _hdf5(source: str, dataset: str | None, matlab: bool) -> Source:
    h5py = _library("hdf5", source)
    try:
        f = h5py.File(source, "r")
    except Exception as exc:  # h5py raises OSError with HDF5's own words
        raise ScalesieveError(f"is not a readable HDF5 file ({_reason(exc)})",
                              source=source) from None
    found: dict[str, object] = {}
    refused: list[str] = []
    empty: list[str] = []

    def visit(name, obj):
        if isinstance(obj, h5py.Group):
            if len(obj) == 0:
                empty.append("/" + name)
            return
        if not isinstance(obj, h5py.Dataset) or any(p.startswith("#") for p in name.split("/")):
            return
        if name.split("/")[-1].lower() in RATE_NAMES or obj.shape is None:
            return
        if obj.dtype.kind not in "iufb":
            refused.append(f"{name!r} ({obj.dtype.kind == 'S' and 'text' or obj.dtype.name})")
            return
        if matlab and _text_attr(obj, "MATLAB_class") in ("char", "logical", "cell"):
            refused.append(f"{name!r} ({_text_attr(obj, 'MATLAB_class')})")
            return
        if obj.ndim > 2:
            refused.append(f"{name!r} ({obj.ndim}-D, shape {'x'.join(map(str, obj.shape))})")
            return
        if obj.size < 2:
            return
        found[name] = obj

    try:
        f.visititems(visit)
        target = None if dataset is None else dataset.strip("/")
        if target is not None and target not in found and target in f \
                and isinstance(f[target], h5py.Dataset):
            raise ScalesieveError(f"dataset {dataset!r} is not a 1-D or 2-D array of numbers",
                                  source=source)
        if not found:
            bits = []
            if refused:
                bits.append("not usable: " + ", ".join(refused[:6]))
            if empty:
                bits.append("empty groups: " + ", ".join(empty[:6]))
            raise ScalesieveError("holds no 1-D or 2-D array of numbers to analyse"
                                  + (f" ({'; '.join(bits)})" if bits else ""), source=source)
        what = "numeric variables" if matlab else "numeric datasets"
        name = _choose(sorted(found), target, "--dataset", what, source)
        obj = found[name]
        rate = _hdf5_rate(obj, f)
        shape = obj.shape
        # MATLAB stores column-major: a (samples x channels) variable lands transposed.
        if obj.ndim == 1:
            frames, width, time_axis = shape[0], 1, 0
        else:
            time_axis = 0 if shape[0] >= shape[1] else 1
            frames, width = shape[time_axis], shape[1 - time_axis]
        short = name.split("/")[-1]
        labels = obj.attrs.get("channel_names") if not matlab else None
        if labels is not None and len(labels) == width:
            names = [x.decode() if isinstance(x, bytes) else str(x) for x in labels]
        else:
            names = [short] if width == 1 else [f"{short}[{k}]" for k in range(width)]
        unit = _text_attr(obj, "unit", "units") or ""
    finally:
        f.close()

    def read(a: int, b: int, cols: list[int]) -> np.ndarray:
        r = _Hdf5Ranges(h5py, source, name, time_axis)
        try:
            return r.read(a, b, cols)
        finally:
            r.close()

    return Source(names, [unit] * width, rate, int(frames), read,
                  format="MATLAB v7.3" if matlab else "HDF5", detail={"dataset": name},
                  session=lambda: _Hdf5Ranges(h5py, source, name, time_axis))


class _Hdf5Ranges:
    """An HDF5 file open while ranges of one dataset are read, each a slice on disk."""

    def __init__(self, h5py, source: str, name: str, time_axis: int):
        self.file = h5py.File(source, "r")
        self.d, self.time_axis = self.file[name], time_axis

    def read(self, a: int, b: int, cols: list[int]) -> np.ndarray:
        d = self.d
        if d.ndim == 1:
            block = d[a:b][:, None]
        elif self.time_axis == 0:
            block = d[a:b, :]
        else:
            block = d[:, a:b].T
        return np.asarray(block, dtype=np.float64)[:, cols]

    def close(self) -> None:
        self.file.close()


# zlib's deflate packs at most about 1032 bytes into one (its format's limit)
_MOST_INFLATION = 1032


def _mat5_matrix_fits(body: bytes, nbytes: int, end: str) -> bool:
    """Whether a miMATRIX element's dimensions fit in its ``nbytes`` (its first bytes given).

    Every element of a numeric or text array takes at least one byte on disk, so
    a product of dimensions beyond ``nbytes`` is a damaged tag (sparse arrays aside).
    """
    import struct

    if len(body) < 24:
        return True
    kind, size = struct.unpack(end + "II", body[:8])
    if kind != 6 or size < 8:  # miUINT32 array flags
        return True
    cls = struct.unpack(end + "I", body[8:12])[0] & 0xFF
    dkind, dsize = struct.unpack(end + "II", body[16:24])
    if dkind >> 16:  # dimensions packed into the tag
        dsize, dkind = dkind >> 16, dkind & 0xFFFF
        dims_bytes = body[20:20 + dsize]
    else:
        dims_bytes = body[24:24 + dsize]
    if dkind != 5 or dsize % 4 or len(dims_bytes) < dsize:  # miINT32 dimensions
        return True
    dims = struct.unpack(end + f"{dsize // 4}i", dims_bytes)
    if any(d < 0 for d in dims):
        return False
    count = 1
    for d in dims:
        count *= d
    return cls == 5 or count <= nbytes  # class 5: sparse


def _mat5_sizes_fit(source: str) -> str | None:
    """Why a MATLAB v5 file's element sizes cannot be right, or None when they fit.

    scipy allocates what a variable's tag declares before reading it; a damaged
    tag would ask for gigabytes. Each top-level element must fit in the file, and
    a compressed one's inner size in what its bytes can inflate to.
    """
    import struct
    import zlib

    size = os.path.getsize(source)
    with open(source, "rb") as fh:
        head = fh.read(128)
        if len(head) < 128:
            return "the header is cut short"
        end = "<" if head[126:128] == b"IM" else ">"
        pos = 128
        while pos + 8 <= size:
            fh.seek(pos)
            tag = fh.read(8)
            kind, nbytes = struct.unpack(end + "II", tag)
            if kind not in (14, 15):  # only arrays (miMATRIX) and miCOMPRESSED live here
                return f"the variable tag at byte {pos} is damaged (type {kind})"
            if nbytes > size - pos - 8:
                return (f"a variable at byte {pos} declares {nbytes} bytes, more than the "
                        f"{size - pos - 8} left in the file")
            if kind == 15:  # miCOMPRESSED: check the inner tag's size
                try:
                    inner = zlib.decompressobj().decompress(fh.read(min(nbytes, 4096)), 512)
                except zlib.error:
                    return f"the compressed variable at byte {pos} is damaged"
                if len(inner) >= 8:
                    inner_kind, inner_bytes = struct.unpack(end + "II", inner[:8])
                    if inner_bytes > _MOST_INFLATION * nbytes + 64:
                        return (f"the compressed variable at byte {pos} declares {inner_bytes} "
                                f"bytes, more than its {nbytes} bytes can hold")
                    if inner_kind == 14 and not _mat5_matrix_fits(inner[8:], inner_bytes, end):
                        return f"the variable at byte {pos} declares more values than it holds"
            elif kind == 14 and not _mat5_matrix_fits(fh.read(min(nbytes, 512)), nbytes, end):
                return f"the variable at byte {pos} declares more values than it holds"
            pos += 8 + nbytes + ((-nbytes) % 8 if kind != 15 else 0)
    return None


def _mat5(source: str, dataset: str | None) -> Source:
    sio = _library("mat", source)
    with open(source, "rb") as fh:
        v5 = fh.read(128)[:10] == b"MATLAB 5.0"
    wrong = _mat5_sizes_fit(source) if v5 else None
    if v5 and wrong is None:
        from scalesieve.io.mat5_elements import mat5_damage

        wrong = mat5_damage(source)   # an element SciPy would read unchecked kills the process
    if wrong is not None:
        raise ScalesieveError(f"is not a readable MATLAB file ({wrong})", source=source)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            # a damaged length field must not make scipy allocate beyond the file
            with _CappedFile(source) as fh:
                data = sio.loadmat(fh, squeeze_me=False, mat_dtype=False)
    except NotImplementedError:
        # scipy points v7.3 files to HDF5 readers
        return _hdf5(source, dataset, matlab=True)
    except Exception as exc:  # scipy raises ValueError, TypeError, MatReadError...
        raise ScalesieveError(f"is not a readable MATLAB file ({_reason(exc)})",
                              source=source) from None
    variables = {k: v for k, v in data.items() if not k.startswith("__")}
    rate = None
    for k, v in variables.items():
        if k.lower() in RATE_NAMES:
            arr = np.asarray(v)
            if arr.dtype.kind in "iuf" and arr.size == 1:
                rate = float(arr.ravel()[0])
    found, refused = {}, []
    for k, v in variables.items():
        if k.lower() in RATE_NAMES:
            continue
        arr = np.asarray(v)
        if arr.dtype.kind not in "iufb":
            refused.append(f"{k!r} ({'text' if arr.dtype.kind in 'US' else 'not numbers'})")
            continue
        if arr.ndim > 2:
            refused.append(f"{k!r} ({arr.ndim}-D, shape {'x'.join(map(str, arr.shape))})")
            continue
        if arr.size < 2:
            continue
        found[k] = arr
    if dataset is not None and dataset in variables and dataset not in found:
        raise ScalesieveError(f"variable {dataset!r} is not a 1-D or 2-D array of numbers",
                              source=source)
    if not found:
        extra = f" (not usable: {', '.join(refused[:6])})" if refused else ""
        raise ScalesieveError(f"holds no 1-D or 2-D numeric variable to analyse{extra}",
                              source=source)
    name = _choose(sorted(found), dataset, "--dataset", "numeric variables", source)
    arr = found[name]
    if arr.ndim == 2 and arr.shape[0] < arr.shape[1]:
        arr = arr.T
    arr = arr.reshape(arr.shape[0], -1).astype(np.float64)
    width = arr.shape[1]
    names = [name] if width == 1 else [f"{name}[{k}]" for k in range(width)]

    def read(a: int, b: int, cols: list[int]) -> np.ndarray:
        return arr[a:b, cols]

    return Source(names, [""] * width, rate, arr.shape[0], read, format="MATLAB",
                  detail={"dataset": name})


# ---------------------------------------------------------------------------- MDF
