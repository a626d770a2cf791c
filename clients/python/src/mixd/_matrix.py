"""Conversions between numpy arrays and mixd.v1.Matrix / Labels messages.

Matrices travel as little-endian float64 bytes (the `little_endian` field):
one memory copy each way, no per-element Python work.
"""

from __future__ import annotations

from typing import Any, List, Optional, Tuple

import numpy as np

from ._proto import types_pb2 as pb
from .errors import _invalid

_F8 = np.dtype("<f8")
_I4 = np.dtype("<i4")


def _is_dataframe(x: Any) -> bool:
    """Whether x is a pandas DataFrame, without importing pandas."""
    mod = type(x).__module__ or ""
    return mod.startswith("pandas") and hasattr(x, "columns") and hasattr(x, "to_numpy")


def as_rows(x: Any, what: str = "rows") -> Tuple[np.ndarray, Optional[List[str]]]:
    """Returns x as a C-contiguous little-endian float64 (N, D) array, and
    the column names when x is a pandas DataFrame.

    Raises InvalidArgument for anything that is not 2-D or holds a value that
    is not finite (naming the row and column).
    """
    names: Optional[List[str]] = None
    if _is_dataframe(x):
        names = [str(c) for c in x.columns]
        try:
            x = x.to_numpy(dtype=np.float64)
        except (TypeError, ValueError) as e:
            raise _invalid(f"{what}: the DataFrame's columns must all be numeric: {e}") from None
    try:
        a = np.ascontiguousarray(x, dtype=_F8)
    except (TypeError, ValueError) as e:
        raise _invalid(f"{what}: cannot be read as float64 numbers: {e}") from None
    if a.ndim != 2:
        raise _invalid(f"{what} has shape {a.shape}; want a 2-D array of rows x features (use x.reshape(1, -1) for one row)")
    if a.size and not np.isfinite(a).all():
        flat = int(np.flatnonzero(~np.isfinite(a.reshape(-1)))[0])
        r, c = divmod(flat, a.shape[1])
        raise _invalid(f"{what}: value at row {r}, column {c} is {a[r, c]!r}; values must be finite")
    return a, names


def encode(a: np.ndarray) -> pb.Matrix:
    """Encodes a C-contiguous little-endian float64 (N, D) array."""
    return pb.Matrix(rows=a.shape[0], cols=a.shape[1], little_endian=a.tobytes())


def decode_into(m: pb.Matrix, out: np.ndarray, what: str) -> None:
    """Decodes m into out (shape (rows, cols) or (rows,) for one column)."""
    rows, cols = int(m.rows), int(m.cols)
    n = rows * cols
    if out.size != n:
        raise _invalid(f"{what}: the daemon returned {rows}x{cols} values; want {out.size}")
    flat = out.reshape(-1)
    if m.little_endian:
        if len(m.little_endian) != 8 * n:
            raise _invalid(f"{what}: {len(m.little_endian)} bytes for {rows}x{cols} values")
        flat[:] = np.frombuffer(m.little_endian, dtype=_F8)
    elif n:
        flat[:] = np.asarray(m.values, dtype=np.float64)


def decode(m: pb.Matrix, what: str) -> np.ndarray:
    """Decodes m into a new (rows, cols) float64 array."""
    out = np.empty((int(m.rows), int(m.cols)), dtype=np.float64)
    decode_into(m, out, what)
    return out


def decode_labels_into(lab: pb.Labels, out: np.ndarray, what: str) -> None:
    """Decodes labels into the int32 array out."""
    if lab.little_endian:
        if len(lab.little_endian) != 4 * out.size:
            raise _invalid(f"{what}: {len(lab.little_endian)} bytes for {out.size} labels")
        out[:] = np.frombuffer(lab.little_endian, dtype=_I4)
    elif out.size:
        out[:] = np.asarray(lab.values, dtype=np.int32)


def encode_labels(labels: Any, n: int, what: str) -> pb.Labels:
    """Encodes n component labels as little-endian int32."""
    a = np.asarray(labels)
    if a.shape != (n,):
        raise _invalid(f"{what} has shape {a.shape}; want one label per row ({n},)")
    if a.size and not np.issubdtype(a.dtype, np.integer):
        raise _invalid(f"{what} must hold integer component indices, not {a.dtype}")
    return pb.Labels(little_endian=np.ascontiguousarray(a, dtype=_I4).tobytes())


def bools(values: Any, n: int) -> np.ndarray:
    """A repeated bool field as a numpy bool array of length n."""
    if n == 0:
        return np.zeros(0, dtype=bool)
    return np.asarray(values, dtype=bool)
