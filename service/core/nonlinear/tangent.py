"""Tangent-plane linear algebra of a weighted Jacobian (SVD after column scaling).

Every quantity here is computed from the singular value decomposition of
``Js = sqrt(W) J D^-1``, where ``D`` holds the Euclidean column norms (so the
numbers do not depend on the parameters' units). With ``Js = U S V'``:

* numerical rank: singular values above ``max(n, p) * eps * s_max`` (the
  common-practice threshold of ``numpy.linalg.matrix_rank``);
* ``Q1' r`` of Bates & Watts (1981) is ``U1' r`` (``U1``: the rank leading
  columns), so the relative offset is
  ``(||U1' r|| / sqrt(rank)) / (||r - U1 U1' r|| / sqrt(n - rank))``;
* the Gauss-Newton step is ``D^-1 V1 S1^-1 U1' r`` (minimum norm when rank
  deficient);
* ``(J'WJ)^-1 = D^-1 V S^-2 V' D^-1``; leverages are the row sums of ``U1**2``.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

EPS = float(np.finfo(float).eps)


class Tangent(NamedTuple):
    """SVD of the column-scaled weighted Jacobian."""

    scale: np.ndarray  # (p,) column norms D (1 where a column is zero)
    u: np.ndarray  # (n, rank)
    singular: np.ndarray  # (p,) all singular values, descending
    vt: np.ndarray  # (p, p)
    rank: int
    condition: float  # s_max / s_min of Js (inf when singular)


def tangent(jw: np.ndarray) -> Tangent:
    """Decompose the weighted Jacobian ``jw`` (n x p, finite)."""
    n, p = jw.shape
    with np.errstate(all="ignore"):
        scale = np.sqrt(np.einsum("ij,ij->j", jw, jw))
        scale[~(np.isfinite(scale) & (scale > 0))] = 1.0
        u, s, vt = np.linalg.svd(jw / scale, full_matrices=False)
    if s.size == 0 or s[0] == 0:
        return Tangent(scale, u[:, :0], s, vt, 0, np.inf)
    rank = int(np.count_nonzero(s > max(n, p) * EPS * s[0]))
    condition = float(s[0] / s[-1]) if s[-1] > 0 else np.inf
    return Tangent(scale, u[:, :rank], s, vt, rank, condition)


def projection(t: Tangent, rw: np.ndarray) -> tuple[float, float]:
    """``(||U1' r||, ||r - U1 U1' r||)`` for weighted residuals ``rw``."""
    c = t.u.T @ rw
    orth = rw - t.u @ c
    return float(np.sqrt(c @ c)), float(np.sqrt(orth @ orth))


def relative_offset(t: Tangent, rw: np.ndarray) -> float:
    """Bates & Watts (1981) relative offset; NaN when there is no residual df."""
    n = rw.size
    proj, orth = projection(t, rw)
    if t.rank == 0 or n <= t.rank:
        return np.nan
    if orth == 0.0:
        return 0.0 if proj == 0.0 else np.inf
    return (proj / np.sqrt(t.rank)) / (orth / np.sqrt(n - t.rank))


def gradient_cosine(jw: np.ndarray, rw: np.ndarray) -> float:
    """Largest |cosine| between the weighted residuals and a weighted Jacobian column."""
    with np.errstate(all="ignore"):
        rn = float(np.sqrt(rw @ rw))
        cn = np.sqrt(np.einsum("ij,ij->j", jw, jw))
        if rn == 0.0:
            return 0.0
        cos = np.abs(jw.T @ rw) / (cn * rn)
    cos = cos[cn > 0]
    return float(cos.max()) if cos.size else 0.0


def gauss_newton_step(t: Tangent, rw: np.ndarray) -> np.ndarray:
    """Minimum-norm Gauss-Newton step in parameter units (``r = sqrt(w) (y - f)``)."""
    k = t.rank
    c = t.u.T @ rw
    return (t.vt[:k].T @ (c / t.singular[:k])) / t.scale


def unscaled_covariance(t: Tangent) -> np.ndarray:
    """``(J'WJ)^-1`` (NaN everywhere when the Jacobian is rank deficient)."""
    p = t.scale.size
    if t.rank < p:
        return np.full((p, p), np.nan)
    vs = t.vt.T / t.singular
    cov = (vs @ vs.T) / np.outer(t.scale, t.scale)
    return 0.5 * (cov + cov.T)


def leverages(t: Tangent) -> np.ndarray:
    """Diagonal of the hat matrix of ``sqrt(W) J`` (tangent-plane leverages)."""
    return np.einsum("ij,ij->i", t.u, t.u)


def null_directions(t: Tangent, names: tuple[str, ...]) -> list[str]:
    """Parameters that carry the Jacobian's null space (largest |loading| >= 0.1)."""
    if t.rank >= t.scale.size:
        return []
    null = np.abs(t.vt[t.rank:])
    involved = (null >= 0.1 * null.max(axis=1, keepdims=True)).any(axis=0)
    return [s for s, b in zip(names, involved, strict=True) if b]
