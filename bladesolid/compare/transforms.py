"""Rigid transforms as (4, 4) homogeneous matrices in metres, and the transform files users give.

A transform maps a repaired mesh's own coordinates to its reference's model frame,
``r' = R r + t``; :func:`read_transform` reads one from a JSON, TOML or text file (or
``"identity"``) and refuses anything that is not a proper rigid motion.
"""

from __future__ import annotations

import json
import math
import os

import numpy as np

from ..errors import InputError
from ..frame import rotation_about  # noqa: F401 - used by the doctests

__all__ = ["apply_transform", "check_rigid", "invert_rigid", "read_transform", "rigid_matrix", "rotation_angle_deg"]


def rigid_matrix(R, t) -> np.ndarray:
    """(4, 4) homogeneous matrix of the rigid motion r' = R r + t.

    >>> rigid_matrix(np.eye(3), [1.0, 2.0, 3.0])[:3, 3].tolist()
    [1.0, 2.0, 3.0]
    """
    T = np.eye(4)
    T[:3, :3] = np.asarray(R, dtype=float)
    T[:3, 3] = np.asarray(t, dtype=float)
    return T


def apply_transform(T: np.ndarray, points) -> np.ndarray:
    """Points (..., 3) moved by the (4, 4) rigid matrix ``T``."""
    p = np.asarray(points, dtype=float)
    return p @ T[:3, :3].T + T[:3, 3]


def invert_rigid(T: np.ndarray) -> np.ndarray:
    """Inverse of a (4, 4) rigid matrix: R → Rᵀ, t → −Rᵀ t.

    >>> T = rigid_matrix(rotation_about([0, 0, 1], 0.3), [1.0, 0.0, 0.0])
    >>> bool(np.allclose(invert_rigid(T) @ T, np.eye(4)))
    True
    """
    R = T[:3, :3]
    return rigid_matrix(R.T, -R.T @ T[:3, 3])


def rotation_angle_deg(R: np.ndarray) -> float:
    """Angle (deg) of the rotation ``R`` about its axis, from its trace (robust near 0 via
    the skew part).

    >>> round(rotation_angle_deg(rotation_about([1, 2, 3], math.radians(0.01))), 9)
    0.01
    """
    R = np.asarray(R, dtype=float)
    s = 0.5 * np.linalg.norm([R[2, 1] - R[1, 2], R[0, 2] - R[2, 0], R[1, 0] - R[0, 1]])
    c = 0.5 * (np.trace(R) - 1.0)
    return math.degrees(math.atan2(s, c))


def check_rigid(T, source: str) -> np.ndarray:
    """A (4, 4) float matrix checked to be a proper rigid motion (orthonormal rotation with
    determinant +1, last row 0 0 0 1); :class:`InputError` naming ``source`` otherwise."""
    try:
        M = np.asarray(T, dtype=float)
    except (TypeError, ValueError):
        raise InputError(source, "the transform must be a 4x4 matrix of numbers (4 rows of 4)") from None
    if M.shape != (4, 4):
        raise InputError(source, f"the transform must be a 4x4 matrix (4 rows of 4 numbers), got shape {M.shape}")
    if not np.all(np.isfinite(M)):
        raise InputError(source, "the transform contains a non-finite number")
    if not np.allclose(M[3], [0.0, 0.0, 0.0, 1.0], atol=1e-9):
        raise InputError(source, f"the last row of the transform must be 0 0 0 1, got {M[3].tolist()}")
    R = M[:3, :3]
    err = float(np.abs(R.T @ R - np.eye(3)).max())
    if err > 1e-6:
        raise InputError(source, f"the rotation part of the transform is not orthonormal (RᵀR differs from 1 by {err:.3g}); "
                                 "scaling and shear are not rigid motions")
    if np.linalg.det(R) < 0:
        raise InputError(source, "the transform is a reflection (determinant −1), not a rigid motion")
    return M


def _transform_table(data: dict, path: str, default_units: str, expected: str):
    """(matrix, units) of a transform given as a table {transform, units?, note?}."""
    if set(data) - {"transform", "units", "note"} or "transform" not in data:
        raise InputError(path, f"expected {expected} and optionally 'units' and 'note'; got keys {sorted(data)}")
    return data["transform"], data.get("units", default_units)


def read_transform(path, *, default_units: str = "m") -> np.ndarray:
    """A rigid transform (repaired → reference model frame) from a file, in metres.

    ``path`` is ``"identity"`` (both meshes already in the same frame) or a file:

    * ``.json`` — a 4x4 list of rows, or ``{"transform": [[...], ...], "units": "mm"}``, or a
      bladesolid comparison report (``comparison.registration.transform``, metres);
    * ``.toml`` — ``transform = [[...], ...]`` and optionally ``units = "mm"``;
    * anything else — text, 4 rows of 4 numbers (spaces or commas), ``#`` comments; a comment
      line ``# units: mm`` states the unit of the translation.

    The translation is in ``units`` (default metres); the rotation must be proper.

    >>> read_transform("identity").tolist() == np.eye(4).tolist()
    True
    """
    from ..units import length_scale

    p = os.fspath(path)
    if str(p).strip().lower() == "identity":
        return np.eye(4)
    from ..io import check_input_file

    check_input_file(p, "transform file", 1_000_000, " (give a file with a 4x4 matrix, or 'identity')")
    ext = os.path.splitext(p)[1].lower()
    units = default_units
    try:
        if ext == ".json":
            with open(p, encoding="utf-8") as fh:
                data = json.load(fh)
            if isinstance(data, dict) and isinstance(data.get("comparison"), dict):
                reg = data["comparison"].get("registration")
                if not isinstance(reg, dict) or "transform" not in reg:
                    raise InputError(p, "a comparison report without comparison.registration.transform")
                M, units = reg["transform"], "m"
            elif isinstance(data, dict):
                M, units = _transform_table(data, p, default_units, "a 4x4 list, or an object with keys 'transform' (4x4)")
            else:
                M = data
        elif ext == ".toml":
            from ..io import read_toml

            data = read_toml(p, "transform file", 1_000_000)
            M, units = _transform_table(data, p, default_units, "the key 'transform' (4 rows of 4 numbers)")
        else:
            rows = []
            with open(p, encoding="utf-8") as fh:
                for line in fh:
                    s = line.strip()
                    if s.startswith("#"):
                        body = s.lstrip("#").strip()
                        if body.lower().startswith("units"):
                            units = body.split(":", 1)[-1].split("=", 1)[-1].strip().strip("\"'")
                        continue
                    if s:
                        rows.append([float(x) for x in s.replace(",", " ").split()])
            M = rows
    except InputError:
        raise
    except (ValueError, OSError, UnicodeDecodeError) as exc:
        raise InputError(p, f"cannot read a 4x4 transform ({str(exc).splitlines()[0] if str(exc) else type(exc).__name__})") from None
    except Exception as exc:  # tomllib.TOMLDecodeError and friends
        raise InputError(p, f"cannot read a 4x4 transform ({str(exc).splitlines()[0]})") from None
    if not isinstance(units, str):
        raise InputError(p, f"'units' must be a string such as \"mm\", got {units!r}")
    scale = length_scale(units, f"{p}: units")
    M = check_rigid(M, p).copy()
    M[:3, 3] *= scale
    return M
