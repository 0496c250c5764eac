"""The elastic blade: stresses, untwist and natural frequencies of the spinning blade solid
(docs/CONVENTIONS.md §10).

Typical use::

    from bladesolid import api
    from bladesolid.elastic import elastic_model, solve_static, campbell, crossings
    blade = api.load_blade("meshes/demo_blade.stl", "mm", [("material", "al-2025-t6")], elements=False)
    model = elastic_model(blade, blade_angle_deg=25.0, element_size_m=0.01)
    state = solve_static(model, rpm=2500)          # centrifugal stress, untwist, root reaction
    sweep = campbell(model, [0, 1000, 2000, 2500, 3000], n_modes=8)
    print(state.untwist_deg, state.max_von_mises_Pa, crossings(sweep, blades=3))

Quality tetrahedral mesh (TetGen, radius–edge and volume bounds), 10-node tetrahedra, the blade
clamped at or inboard of ``clamp_radius`` along the pitch axis, the centrifugal body force at the
blade angle asked for, geometric stiffness and spin softening iterated to convergence of the
untwist, modes with the prestress (Coriolis coupling neglected). SI and hub frame throughout.
Submodules are imported on first use so that ``import bladesolid`` stays fast.
"""

from __future__ import annotations

import importlib

_EXPORTS = {
    "elastic_model": "model", "ElasticModel": "model", "elastic_constants": "model", "ElasticConstants": "model",
    "clamped_nodes": "model", "interpolate": "model",
    "solve_static": "static", "StaticResult": "static", "untwist": "static",
    "spanwise_elastic": "span", "SpanElastic": "span",
    "modes_at": "modes", "campbell": "modes", "ModeSet": "modes", "crossings": "modes", "Crossing": "modes",
    "write_vtu": "vtu",
    "quality_mesh": "qmesh", "QualityMesh": "qmesh",
}

__all__ = sorted(_EXPORTS)


def __getattr__(name):
    if name in _EXPORTS:
        return getattr(importlib.import_module(f".{_EXPORTS[name]}", __name__), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
