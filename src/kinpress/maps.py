"""A 2-D map of the items: classical multidimensional scaling of their distance matrix.

Classical (metric) scaling, Torgerson (1952), "Multidimensional scaling: I. Theory and method",
Psychometrika 17(4), and Gower (1966), "Some distance properties of latent root and vector
methods used in multivariate analysis", Biometrika 53(3/4) (principal coordinates analysis):
with D² the squared distances and J = I − 11ᵀ/n the centring matrix, B = −½ J D² J is the
matrix of inner products of points centred at their mean; its largest eigenvalues λ₁ ≥ λ₂ and
eigenvectors v₁, v₂ give the coordinates X = [v₁√λ₁, v₂√λ₂]. For distances that are Euclidean
in the plane the map recovers the points exactly, up to rotation, reflection and translation.

NCD is not a Euclidean distance, so B has negative eigenvalues too; `MapResult` keeps the
eigenvalues and says how much of the matrix the two axes show (`explained`: the share of the
sum of the absolute eigenvalues, one of the goodness-of-fit figures Gower 1966 discusses), and
how well the map's distances follow the matrix (`stress`, Kruskal's stress-1 of the fitted
distances against the given ones).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from .distance import check_distances
from .formats import json_ready

__all__ = ["MapResult", "classical_scaling"]


@dataclass(frozen=True)
class MapResult:
    """Coordinates of each item (`coordinates[i]` for `labels[i]`, one column per axis), the
    eigenvalues of the centred inner-product matrix (largest first, all n of them), the share of
    the absolute eigenvalues the axes show (`explained`), and Kruskal's stress-1 of the map's
    distances against the matrix (0: the map holds every distance exactly)."""

    labels: tuple[str, ...]
    coordinates: np.ndarray
    eigenvalues: np.ndarray
    explained: float
    stress: float
    method: str = "classical scaling (Torgerson 1952; Gower 1966)"

    @property
    def dimensions(self) -> int:
        return int(self.coordinates.shape[1])

    def as_json(self) -> dict[str, object]:
        """Method, per item its coordinates (8 decimals), the leading eigenvalues (as many as
        axes, plus the smallest), explained share and stress (6 decimals)."""
        return dict(
            json_ready(
                {
                    "method": self.method,
                    "items": [
                        {"item": name, "coordinates": np.round(row, 8)}
                        for name, row in zip(self.labels, self.coordinates, strict=True)
                    ],
                    "eigenvalues": np.round(self.eigenvalues[: self.dimensions], 8),
                    "smallest_eigenvalue": round(float(self.eigenvalues[-1]), 8),
                    "explained": round(self.explained, 6),
                    "stress": round(self.stress, 6),
                }
            )
        )


def classical_scaling(
    labels: Sequence[str], distances: npt.ArrayLike, dimensions: int = 2
) -> MapResult:
    """The items of a distance matrix as points in `dimensions` axes (see the module docstring).

    Axes whose eigenvalue is not positive (fewer points than axes, or points on a line) are
    zero. Each axis's sign is fixed so that its largest coordinate in absolute value is
    positive, so the same matrix always gives the same picture.
    """
    d = check_distances(distances, labels)  # non-empty, square, finite, symmetric, zero diagonal
    n = d.shape[0]
    if dimensions < 1:
        raise ValueError(f"dimensions must be at least 1, got {dimensions}")
    squared = d**2
    # B = -1/2 J D² J, written as double centring (subtract row and column means, add the mean).
    row_means = squared.mean(axis=1, keepdims=True)
    b = -0.5 * (squared - row_means - row_means.T + squared.mean())
    b = (b + b.T) / 2
    values, vectors = np.linalg.eigh(b)
    order = np.argsort(values)[::-1]
    values, vectors = values[order], vectors[:, order]
    coordinates = np.zeros((n, dimensions))
    for axis in range(min(dimensions, n)):
        if values[axis] > 1e-12 * max(1.0, abs(values[0])):
            column = vectors[:, axis] * math.sqrt(values[axis])
            if column[np.argmax(np.abs(column))] < 0:
                column = -column
            coordinates[:, axis] = column
    total = float(np.abs(values).sum())
    shown = float(np.clip(values[:dimensions], 0, None).sum())
    explained = shown / total if total > 0 else math.nan
    fitted = np.sqrt(((coordinates[:, None, :] - coordinates[None, :, :]) ** 2).sum(axis=2))
    upper = np.triu_indices(n, 1)
    scale = float((d[upper] ** 2).sum())
    stress = math.sqrt(float(((d[upper] - fitted[upper]) ** 2).sum()) / scale) if scale > 0 else 0.0
    return MapResult(tuple(labels), coordinates, values, explained, stress)
