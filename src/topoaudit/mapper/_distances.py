"""Blocked Euclidean distance computations with bounded memory.

In ten or more dimensions, tree indexes answer neighbour queries little faster than
brute force, while a matrix product computes a block of squared distances at BLAS speed.
Every routine here walks the query rows in blocks sized so that one block of distances
stays under ``max_bytes`` (64 MiB by default); no n x n matrix is ever formed.

The neighbour routines (:func:`nearest_index`, :func:`kth_distance`) use blocks of at most
:data:`BLOCK_BYTES` into one reused buffer, so that each block is still in cache when it is
reduced, and compute ``||b||² - 2 a·b`` with a single matrix product of ``[a, 1]`` and
``[-2 b, ||b||²]``: the squared distance less ``||a||²``, which is constant along a row and
so changes neither the nearest row nor the order of a row's distances. ``||a||²`` is added
back only to the distances returned. These products are thin (``d + 1`` columns) and
bound by memory, not arithmetic, so they run on one BLAS thread: several threads gain
nothing on them and, when the cores are busy, lose much time waiting for each other.
"""

from __future__ import annotations

import contextlib
from collections.abc import Iterator
from typing import Any

import numpy as np

__all__ = [
    "BLOCK_BYTES",
    "MAX_BYTES",
    "iter_sq_distances",
    "kth_distance",
    "nearest_index",
    "one_blas_thread",
]

MAX_BYTES = 64 * 2**20
BLOCK_BYTES = 2**20
"""Target size of one block of distances in the neighbour routines (cache-sized)."""

_MIN_BLOCK_ROWS = 8
_controller: Any = None


def one_blas_thread() -> contextlib.AbstractContextManager[Any]:
    """A context in which numpy's BLAS uses one thread (a no-op without threadpoolctl)."""
    global _controller
    if _controller is None:
        try:
            from threadpoolctl import ThreadpoolController
        except ImportError:  # pragma: no cover - installed with scikit-learn
            return contextlib.nullcontext()
        _controller = ThreadpoolController()
    return _controller.limit(limits=1, user_api="blas")


def _block_rows(n_ref: int, max_bytes: int) -> int:
    return max(1, min(65536, max_bytes // (8 * max(1, n_ref))))


def iter_sq_distances(
    A: np.ndarray, B: np.ndarray, *, max_bytes: int = MAX_BYTES
) -> Iterator[tuple[int, int, np.ndarray]]:
    """Yield ``(start, stop, D2)`` where ``D2[i, j] = ||A[start + i] - B[j]||²``.

    When ``A is B`` the distance of each row to itself is exactly 0.
    Cost: O(len(A) * len(B) * d) time, O(max_bytes) memory.
    """
    same = A is B
    # Shift both sets by the mean of B: the expansion ||a||² - 2 a.b + ||b||² loses about
    # eps * ||x||² to cancellation, so distances far from the origin would lose digits.
    shift = B.mean(axis=0) if B.shape[0] else np.zeros(B.shape[1])
    B = B - shift
    b_sq = np.einsum("ij,ij->i", B, B)
    step = _block_rows(B.shape[0], max_bytes)
    for start in range(0, A.shape[0], step):
        a = A[start : start + step] - shift
        d2 = a @ B.T
        d2 *= -2.0
        d2 += np.einsum("ij,ij->i", a, a)[:, None]
        d2 += b_sq[None, :]
        np.maximum(d2, 0.0, out=d2)
        if same:  # the expansion leaves rounding error, not 0, on the diagonal
            diag = np.arange(a.shape[0])
            d2[diag, start + diag] = 0.0
        yield start, start + a.shape[0], d2


def _iter_shifted(
    A: np.ndarray, B: np.ndarray, max_bytes: int
) -> Iterator[tuple[int, int, np.ndarray, np.ndarray]]:
    """Yield ``(start, stop, a, V)`` with ``V[i, j] = ||B[j]||² - 2 A[start + i]·B[j]``.

    Both sets are first shifted by the mean of ``B`` (which changes no distance) so that
    the expansion does not lose digits to cancellation far from the origin; ``a`` is the
    block of rows of ``A``, shifted the same way. ``V`` is a view of a buffer reused by the
    next block: use it before asking for the next one.
    """
    A = np.ascontiguousarray(A, dtype=np.float64)
    B = np.ascontiguousarray(B, dtype=np.float64)
    n_ref, d = B.shape
    shift = B.mean(axis=0) if n_ref else np.zeros(d)
    B = B - shift
    ref = np.empty((d + 1, n_ref), dtype=np.float64)
    np.multiply(B.T, -2.0, out=ref[:d])
    ref[d] = np.einsum("ij,ij->i", B, B)
    step = max(_MIN_BLOCK_ROWS, _block_rows(n_ref, min(max_bytes, BLOCK_BYTES)))
    step = min(step, max(1, A.shape[0]))
    query = np.ones((step, d + 1), dtype=np.float64)
    out = np.empty((step, n_ref), dtype=np.float64)
    for start in range(0, A.shape[0], step):
        a = A[start : start + step] - shift
        m = a.shape[0]
        query[:m, :d] = a
        np.matmul(query[:m], ref, out=out[:m])
        yield start, start + m, a, out[:m]


def nearest_index(A: np.ndarray, B: np.ndarray, *, max_bytes: int = MAX_BYTES) -> np.ndarray:
    """Index of the nearest row of ``B`` for each row of ``A`` (ties: the lowest index).

    Parameters
    ----------
    A : ndarray of shape (n, d)
        Query rows.
    B : ndarray of shape (m, d)
        Reference rows, ``m >= 1``.
    max_bytes : int, default=MAX_BYTES
        Upper bound on the memory of one block of distances.

    Returns
    -------
    ndarray of shape (n,)
        Positions in ``B``.

    Examples
    --------
    >>> nearest_index(np.array([[0.1], [2.9], [1.6]]), np.array([[0.0], [3.0], [1.5]])).tolist()
    [0, 1, 2]
    """
    out = np.empty(A.shape[0], dtype=np.intp)
    with one_blas_thread():
        for start, stop, _, v in _iter_shifted(A, B, max_bytes):
            np.argmin(v, axis=1, out=out[start:stop])
    return out


def kth_distance(
    A: np.ndarray, B: np.ndarray, k: int, *, self_included: bool, max_bytes: int = MAX_BYTES
) -> np.ndarray:
    """Distance from each row of ``A`` to its ``k``-th nearest row of ``B``.

    With ``self_included`` (``A`` is a subset of ``B``), each row's zero distance to itself
    is skipped, so ``k=1`` is the nearest *other* row.

    Parameters
    ----------
    A : ndarray of shape (n, d)
        Query rows.
    B : ndarray of shape (m, d)
        Reference rows.
    k : int
        Rank of the neighbour, from 1; at most ``m`` rows are counted.
    self_included : bool
        Whether every row of ``A`` is also a row of ``B``.
    max_bytes : int, default=MAX_BYTES
        Upper bound on the memory of one block of distances.

    Returns
    -------
    ndarray of shape (n,)

    Examples
    --------
    >>> X = np.array([[0.0], [1.0], [3.0]])
    >>> kth_distance(X, X, 1, self_included=True).tolist()
    [1.0, 1.0, 2.0]
    """
    kk = k + 1 if self_included else k
    kk = min(kk, B.shape[0])
    out = np.empty(A.shape[0], dtype=np.float64)
    with one_blas_thread():
        for start, stop, a, v in _iter_shifted(A, B, max_bytes):
            v.partition(kk - 1, axis=1)
            part = v[:, kk - 1] + np.einsum("ij,ij->i", a, a)
            np.maximum(part, 0.0, out=part)
            np.sqrt(part, out=out[start:stop])
    return out
