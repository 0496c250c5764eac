"""bladesolid: mass properties and centrifugal loads of rotating blades.

The pipeline, one module (or package) per stage, data flowing one way::

    io -> mesh -> moments -> frame -> loads -> api (Blade) -> span / fields / compare -> report / views

The names most work needs are importable from here (loaded on first use, so that
``import bladesolid`` stays fast)::

    from bladesolid import load_blade
    blade = load_blade("meshes/demo_blade.stl", units="mm", densities=[("material", "al-2025-t6")])
    blade.loads(2500, blade_angle_deg=25.0).ctm_Nm

Results are engineering estimates, not airworthiness or certification data.
"""

__version__ = "0.1.0"

CAUTION = (
    "Results are engineering estimates, not airworthiness or certification data. "
    "Defer to the type-certificate holder's or manufacturer's data, the applicable "
    "regulations and codes, and licensed engineers and repair stations."
)

#: The names of :mod:`bladesolid.api` (and the error type) importable from the package itself.
_API = {
    "Blade": "api", "BodyMaterial": "api", "LumpedMass": "api", "MassProperties": "api", "blade_from_job": "api",
    "blade_from_surfaces": "api", "load_blade": "api", "loads_at": "api", "mass_properties": "api",
    "pitch_sweep": "api", "resolve_blade_angle": "api", "InputError": "errors",
}

__all__ = ["CAUTION", "__version__", *_API]


def __getattr__(name):
    if name in _API:
        import importlib

        value = getattr(importlib.import_module(f".{_API[name]}", __name__), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def __dir__():
    return sorted(set(globals()) | set(_API))
