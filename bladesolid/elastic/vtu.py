"""The elastic state as a VTK XML unstructured grid (``.vtu``) for any VTK viewer."""

from __future__ import annotations

import os

import numpy as np

from ..errors import InputError
from ..safefile import staged_file
from .model import ElasticModel
from .static import StaticResult


def write_vtu(model: ElasticModel, state: StaticResult, path, force: bool = False) -> str:
    """Write the 10-node tetrahedra (VTK quadratic tetra, hub frame at the blade angle, m)
    with point data ``displacement_m`` (n, 3) and cell data ``stress_Pa`` (k, 6: xx, yy, zz,
    yz, xz, xy, element centroid) and ``von_mises_Pa`` (k,), plus ``body`` (k,)."""
    import meshio

    p = os.fspath(path)
    if not p.lower().endswith(".vtu"):
        raise InputError(p, "the elastic result file must end in .vtu")
    mesh = meshio.Mesh(
        np.asarray(model.mesh.nodes, float),
        [("tetra10", np.asarray(model.mesh.elements, np.int64))],
        point_data={"displacement_m": np.asarray(state.displacement_m, float)},
        cell_data={"stress_Pa": [np.asarray(state.stress_Pa, float)],
                   "von_mises_Pa": [np.asarray(state.von_mises_Pa, float)],
                   "body": [np.asarray(model.mesh.body, np.int32)]},
    )
    with staged_file(p, force) as tmp:
        meshio.write(tmp, mesh, file_format="vtu")
    return p
