"""How a repaired surface departs from its reference: signed deviation per vertex, removed and added volume.

Negative deviation: the repaired surface lies inside the reference (material missing);
positive: outside (material added). Volumes are boolean differences of the two solids
(manifold3d), in the same frame. Metres.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from ..io import manifold_solid
from .query import SurfaceQuery

__all__ = ["Deviation", "boolean_volumes", "signed_deviation", "solid"]


@dataclass(frozen=True)
class Deviation:
    """Signed deviation of the repaired surface from the reference, per repaired vertex.

    values : (n,) m, + outside the reference (material added), − inside (material missing)
    vertices (n, 3), faces (m, 3) : the repaired surface, registered, reference hub frame, m
    """

    values: np.ndarray
    vertices: np.ndarray
    faces: np.ndarray

    @property
    def min_m(self) -> float:
        return float(self.values.min())

    @property
    def max_m(self) -> float:
        return float(self.values.max())

    @property
    def rms_m(self) -> float:
        return float(np.sqrt(np.mean(self.values**2)))

    @property
    def mean_m(self) -> float:
        return float(self.values.mean())

    @property
    def max_inward_m(self) -> float:
        """Deepest point of the repaired surface inside the reference (≥ 0), m."""
        return max(0.0, -self.min_m)

    @property
    def max_outward_m(self) -> float:
        """Farthest point of the repaired surface outside the reference (≥ 0), m."""
        return max(0.0, self.max_m)


def signed_deviation(points, reference: SurfaceQuery) -> np.ndarray:
    """Signed distance (m) of points from the reference surface: negative inside it (material
    missing there when the points are on the repaired surface), positive outside."""
    return reference.signed_distance(points)[0]


def solid(surfaces, source: str):
    """The union of closed surfaces ``[(vertices (n, 3), faces (m, 3)), ...]`` as one manifold3d
    solid (same frame, metres); :class:`InputError` naming ``source`` when one is not a
    closed 2-manifold."""
    import manifold3d

    total = None
    for v, f in surfaces:
        body = manifold_solid(v, f)
        if body.status() != manifold3d.Error.NoError:
            raise InputError(source, f"the surface is not a closed 2-manifold for the boolean volumes ({body.status()})")
        total = body if total is None else total + body
    return total


def boolean_volumes(reference_surfaces, repaired_surfaces, reference_source: str = "reference",
                    repaired_source: str = "repaired") -> tuple[float, float]:
    """(removed, added) volume, m³: reference − repaired and repaired − reference (manifold3d
    boolean differences of the solids, in the same frame)."""
    a = solid(reference_surfaces, reference_source)
    b = solid(repaired_surfaces, repaired_source)
    return float((a - b).volume()), float((b - a).volume())
