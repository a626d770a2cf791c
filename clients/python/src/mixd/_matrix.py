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


def as_mask(observed: Any, shape: Tuple[int, int], what: str = "observed") -> np.ndarray:
    """Returns an observation mask as a C-contiguous (N, D) uint8 array of
    1 (observed) and 0 (unobserved), ready to be sent as observed_mask bytes.

    ``observed`` must have the shape of the rows and hold booleans (a numpy
    bool array, nested lists of bools, a DataFrame of bools such as
    ``df.notna()``), or integers that are all 0 or 1. Anything else raises
    InvalidArgument naming the problem.
    """
    if _is_dataframe(observed):
        observed = observed.to_numpy()
    a = np.asarray(observed)
    if a.shape != tuple(shape):
        raise _invalid(
            f"{what} has shape {a.shape}; want one flag per value, the shape of the rows {tuple(shape)}"
        )
    if a.dtype == np.bool_:
        return np.ascontiguousarray(a, dtype=np.uint8)
    if a.size and np.issubdtype(a.dtype, np.integer):
        bad = (a != 0) & (a != 1)
        if bad.any():
            r, c = (int(v) for v in np.argwhere(bad)[0])
            raise _invalid(f"{what}: flag at row {r}, column {c} is {a[r, c].item()!r}; want True/1 (observed) or False/0 (unobserved)")
        return np.ascontiguousarray(a, dtype=np.uint8)
    if a.size == 0:
        return np.zeros(shape, dtype=np.uint8)
    raise _invalid(f"{what} must hold booleans (True = observed), not {a.dtype}")


def mask_from_nan(rows: Any) -> Tuple[np.ndarray, np.ndarray]:
    """Turns NaN-marked missing values into the explicit form the daemon takes.

    NaN is never a missing-value marker for mixd: rows holding NaN are
    refused. Data that marks missing values with NaN (a pandas DataFrame
    read from a CSV with empty cells, say) is converted here, explicitly::

        values, observed = mixd.mask_from_nan(df)
        client.score(model, values, observed=observed)

    Args:
        rows: An (N, D) array-like or a pandas DataFrame (columns in order;
            pandas' missing-value markers become NaN).

    Returns:
        ``(values, observed)``: a float64 (N, D) copy of the rows with every
        NaN replaced by 0, and a bool (N, D) array that is False exactly
        where the input was NaN. Infinite values are left as they are (and
        are then refused by the calls, naming the row and column): only NaN
        means "not observed" here.

    Raises:
        InvalidArgument: the input is not 2-D or not numeric.
    """
    if _is_dataframe(rows):
        try:
            rows = rows.to_numpy(dtype=np.float64, na_value=np.nan)
        except (TypeError, ValueError) as e:
            raise _invalid(f"rows: the DataFrame's columns must all be numeric: {e}") from None
    try:
        a = np.array(rows, dtype=_F8, order="C", copy=True)
    except (TypeError, ValueError) as e:
        raise _invalid(f"rows: cannot be read as float64 numbers: {e}") from None
    if a.ndim != 2:
        raise _invalid(f"rows has shape {a.shape}; want a 2-D array of rows x features")
    missing = np.isnan(a)
    a[missing] = 0.0
    return a, ~missing


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
