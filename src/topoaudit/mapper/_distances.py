"""Blocked Euclidean distance computations with bounded memory.

In ten or more dimensions, tree indexes answer neighbour queries little faster than
brute force, while a matrix product computes a block of squared distances at BLAS speed.
Every routine here walks the query rows in blocks sized so that one block of distances
stays under ``max_bytes`` (64 MiB by default); no n x n matrix is ever formed.
"""

from __future__ import annotations

from collections.abc import Iterator

import numpy as np

__all__ = ["iter_sq_distances", "kth_distance", "nearest_index"]

MAX_BYTES = 64 * 2**20


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


def nearest_index(A: np.ndarray, B: np.ndarray, *, max_bytes: int = MAX_BYTES) -> np.ndarray:
    """Index of the nearest row of ``B`` for each row of ``A`` (ties: the lowest index)."""
    out = np.empty(A.shape[0], dtype=np.intp)
    for start, stop, d2 in iter_sq_distances(A, B, max_bytes=max_bytes):
        out[start:stop] = np.argmin(d2, axis=1)
    return out


def kth_distance(
    A: np.ndarray, B: np.ndarray, k: int, *, self_included: bool, max_bytes: int = MAX_BYTES
) -> np.ndarray:
    """Distance from each row of ``A`` to its ``k``-th nearest row of ``B``.

    With ``self_included`` (``A`` is a subset of ``B``), each row's zero distance to itself
    is skipped, so ``k=1`` is the nearest *other* row.
    """
    kk = k + 1 if self_included else k
    kk = min(kk, B.shape[0])
    out = np.empty(A.shape[0], dtype=np.float64)
    for start, stop, d2 in iter_sq_distances(A, B, max_bytes=max_bytes):
        part = np.partition(d2, kk - 1, axis=1)[:, kk - 1]
        out[start:stop] = np.sqrt(part)
    return out
