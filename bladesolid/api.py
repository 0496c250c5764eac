"""The documented Python API of bladesolid; the command line is a thin layer over it.

A :class:`Blade` is the thing to hold (in a notebook, a script, a batch task): it is loaded once
(:func:`load_blade`, :func:`blade_from_job`), and every figure is a method that delegates to
the function of the same job::

    from bladesolid import load_blade
    blade = load_blade("meshes/demo_blade.stl", units="mm", densities=["2810 kg/m^3"])
    blade.mass_properties().mass_kg        # mass_properties(blade)
    blade.loads(2500, blade_angle_deg=30.0)  # loads_at(blade, 2500, 30.0)
    blade.pitch_sweep(2500, -10, 90, 1)    # pitch_sweep(...)
    blade.span(2500), blade.fields(2500)   # bladesolid.span.span_table, bladesolid.fields.element_fields
    blade.compare("repaired.stl", 2500)    # bladesolid.compare.compare_blade

All results are SI, in the hub frame (docs/CONVENTIONS.md §1), as frozen dataclasses. Errors
are :class:`~bladesolid.errors.InputError` naming the file or the parameter
(``blade_angle_deg``) and the problem in one line.
"""

from __future__ import annotations

import functools
import math
import os
from dataclasses import dataclass, field, replace

import numpy as np

from .errors import InputError, one_line
from .frame import BladeAngle, HubFrame, hub_frame, measure_blade_angle
from .loads import CtmCurve, OperatingLoads, ctm_curve, operating_loads, static_moment
from .moments import ElementMoments, Moments, point_mass, relative_difference, zero_moments
from .units import rpm_to_rad_s

__all__ = ["DEFAULT_FIELD_FACES", "SURFACE_CHECK_TOLERANCE", "Blade", "BodyMaterial", "LumpedMass", "MassProperties",
           "blade_from_job", "blade_from_surfaces", "load_blade", "loads_at", "loads_for_job", "mass_properties",
           "pitch_sweep", "principal_axes", "resolve_blade_angle", "resolve_materials", "surface_check",
           "surface_options"]


@dataclass(frozen=True)
class LumpedMass:
    """A point mass fixed to the blade (balance weight, counterweight); turns with the blade.

    position_m : (3,) model frame, m
    """

    name: str
    mass_kg: float
    position_m: np.ndarray


@dataclass(frozen=True)
class BodyMaterial:
    """Density of one body and where it came from."""

    density_kg_m3: float
    label: str  # material name, or the quantity as typed
    source: str = ""


@dataclass(frozen=True, repr=False)
class Blade:
    """A blade ready for analysis. Geometry and moments are in the hub frame, SI.

    Its figures are methods (:meth:`mass_properties`, :meth:`loads`, :meth:`pitch_sweep`,
    :meth:`span`, :meth:`fields`, :meth:`compare`), each delegating to the function of the
    same job.

    surfaces : per body (vertices (n, 3) m, faces (m, 3)), hub frame
    body_moments : per body mass moments from its closed surface (density applied)
    elements : per-element mass moments, hub frame (None when not meshed)
    element_nodes, element_tets, element_body : the tetrahedral mass elements (hub frame)
    lumped_moments : moments of the lumped masses, hub frame
    modelled_angle : the blade angle measured on the modelled solid (None if not measured)
    cad : for a blade read from a CAD file, the record of docs/CONVENTIONS.md §9 (format, unit,
      tolerance, the kernel's figures beside ours: :func:`bladesolid.cad.blade_section`); its
      ``body_moments`` are then the exact ones of the curved triangles, while ``surfaces`` and
      the mass elements are the straight triangulation (not exact for the solid)
    geometry : what the loader did and found (:attr:`bladesolid.io.LoadedMesh.geometry`:
      welding, bodies, cavities, inserts), SI; None for surfaces given directly
    repairs : None when no repair was asked; else the changes made (one dict each, see
      :attr:`bladesolid.io.LoadedMesh.repairs`), empty when nothing needed mending
    mended_surface : ``(vertices (n, 3) in the file's unit, faces (m, 3), part (n,) or None)``
      of the mended surface when the repair changed anything (for the record), else None

    A body's surface is the whole boundary of its material: outer shell, cavities (wound
    into the void) and the seats of its inserts (docs/CONVENTIONS.md §8); its closed-surface
    integral is the body's own moments, and its elements fill exactly its material.
    """

    name: str
    source: str
    units: str
    frame: HubFrame
    materials: tuple[BodyMaterial, ...]
    surfaces: tuple[tuple[np.ndarray, np.ndarray], ...]
    body_moments: tuple[Moments, ...]
    lumped: tuple[LumpedMass, ...]
    lumped_moments: Moments
    tip_radius_m: float
    reference_radius_m: float
    modelled_angle: BladeAngle | None
    elements: ElementMoments | None = None
    element_nodes: np.ndarray | None = None
    element_tets: np.ndarray | None = None
    element_body: np.ndarray | None = None
    field_resolution: dict | None = None
    warnings: tuple[str, ...] = field(default_factory=tuple)
    cad: dict | None = None
    geometry: dict | None = None
    repairs: tuple | None = None
    mended_surface: tuple | None = None

    @property
    def surface_moments(self) -> Moments:
        """Total of the bodies from their closed surfaces (no lumped masses)."""
        total = zero_moments()
        for m in self.body_moments:
            total = total + m
        return total

    @property
    def elements_exact(self) -> bool:
        """True when the elements fill exactly the input solid (not a simplified field copy,
        nor the straight triangulation of a CAD solid's curved faces)."""
        return self.elements is not None and self.field_resolution is None and self.cad is None

    @property
    def solid_moments(self) -> Moments:
        """Total of the bodies: from the elements when they fill the input solid exactly,
        else from the closed surfaces (always exact)."""
        return self.elements.total() if self.elements_exact else self.surface_moments

    @property
    def moments(self) -> Moments:
        """Everything that turns with the blade: bodies plus lumped masses (hub frame)."""
        return self.solid_moments + self.lumped_moments

    @functools.cached_property
    def ctm_curve(self) -> CtmCurve:
        """CTM(β) of everything that turns with the blade (coefficients per Ω²), computed once."""
        return ctm_curve(self.moments, self.frame, self.modelled_deg)

    @property
    def modelled_deg(self) -> float:
        """Modelled blade angle, degrees (0 when it could not be measured)."""
        return self.modelled_angle.angle_deg if self.modelled_angle is not None else 0.0

    @property
    def volume_m3(self) -> float:
        """Volume of the bodies, m³ (from their closed surfaces)."""
        return float(sum(abs(m.mass) / mat.density_kg_m3 for m, mat in zip(self.body_moments, self.materials)))

    def __repr__(self) -> str:
        elements = "none" if self.elements is None else f"{len(self.elements):,}"
        return (f"Blade({one_line(self.name, 60)!r}, mass {self.moments.mass:.6g} kg, bodies {len(self.surfaces)}, "
                f"elements {elements}, units {self.units!r})")

    # --- the figures, each from the function of the same job --------------------------------

    def mass_properties(self) -> MassProperties:
        """:func:`mass_properties` of this blade."""
        return mass_properties(self)

    def loads(self, rpm: float, blade_angle_deg: float | None = None, pitch_change_deg: float | None = None,
              name: str = "") -> OperatingLoads:
        """:func:`loads_at`: the centrifugal loads at ``rpm`` and a blade angle (absolute, or a
        change from the modelled one; default: as modelled)."""
        return loads_at(self, rpm, blade_angle_deg, pitch_change_deg, name=name)

    def pitch_sweep(self, rpm: float, lo_deg: float, hi_deg: float, step_deg: float):
        """:func:`pitch_sweep`: (β deg, CTM N·m, pitch stiffness N·m/rad) over a blade-angle range."""
        return pitch_sweep(self, rpm, lo_deg, hi_deg, step_deg)

    def span(self, rpm: float, blade_angle_deg: float | None = None, pitch_change_deg: float | None = None, *,
             stations=16, allowable_Pa: float | None = None):
        """:func:`bladesolid.span.span_table`: the spanwise table (needs the mass elements)."""
        from .span import span_table

        return span_table(self, rpm, blade_angle_deg, stations, allowable_Pa, pitch_change_deg=pitch_change_deg)

    def fields(self, rpm: float, blade_angle_deg: float | None = None, pitch_change_deg: float | None = None):
        """:func:`bladesolid.fields.element_fields`: per-element mass, radial pull and CTM
        (needs the mass elements)."""
        from .fields import element_fields

        return element_fields(self, rpm, blade_angle_deg, pitch_change_deg=pitch_change_deg)

    def compare(self, repaired, rpm: float, blade_angle_deg: float | None = None,
                pitch_change_deg: float | None = None, *, units: str | None = None, limits=None,
                weld_tol: float | None = None, repair: bool = False, repair_limit_pct: float = 1.0, **options):
        """:func:`bladesolid.compare.compare_blade` with this blade as the reference.

        repaired : a mesh file (read in ``units``, default this blade's, with ``weld_tol``,
          ``repair`` and ``repair_limit_pct`` as in :func:`load_blade`) or its surfaces
          ``[(vertices (n, 3) m, faces (m, 3)), ...]`` in their own frame
        limits : a limits file or :class:`bladesolid.compare.Limits` (None: nothing checked)
        options : the keywords of :func:`~bladesolid.compare.compare_blade` (``transform``, ...)
        """
        from .compare import compare_blade, read_limits

        if isinstance(repaired, (str, os.PathLike)):
            from .io import read_mesh

            from .cad import declares_unit

            path = os.fspath(repaired)
            unit = units if units is not None or declares_unit(path) else self.units  # STEP/IGES: the file's
            loaded = read_mesh(path, unit, weld_tol=weld_tol, repair=repair,
                               repair_limit_pct=repair_limit_pct)
            repaired = [(b.vertices, b.faces) for b in loaded.bodies]
            options.setdefault("repaired_source", path)
            options.setdefault("repaired_name", os.path.basename(path))
        if isinstance(limits, (str, os.PathLike)):
            limits = read_limits(limits)
        return compare_blade(self, repaired, rpm, blade_angle_deg=blade_angle_deg, pitch_change_deg=pitch_change_deg,
                             limits=limits, **options)


def resolve_materials(specs, n_bodies: int, source: str = "densities", inserts=()) -> tuple[BodyMaterial, ...]:
    """Densities for ``n_bodies`` bodies from a list of ``("density", text)`` or
    ``("material", name)`` specs: one spec for all bodies, or one per body in order.

    inserts : ``[(insert name, host name), ...]`` of the bodies that are inserts; an insert is
    its own material, so with inserts one density for all is refused, naming the insert."""
    from .materials import material
    from .units import parse_density

    specs = list(specs or [])
    if not specs:
        raise InputError(source, "no density given: give a density with its unit (\"2810 kg/m^3\") or a material name")
    inserts = list(inserts)
    if len(specs) == 1 and n_bodies > 1 and inserts:
        name, host = inserts[0]
        raise InputError(source, f"one density given for {n_bodies} bodies, but {name} is an insert nested in {host} "
                                 f"(a body of its own material): give one density per body, in order (body 1 first)")
    if len(specs) not in (1, n_bodies):
        raise InputError(source, f"{len(specs)} densities given for {n_bodies} bodies; give one, or one per body")
    out = []
    for kind, value in specs:
        if kind == "material":
            m = material(value, source)
            out.append(BodyMaterial(m.density_kg_m3, m.name, m.source))
        else:
            out.append(BodyMaterial(parse_density(value, source), str(value), "given"))
    if len(out) == 1:
        out = out * n_bodies
    return tuple(out)


def load_blade(
    path,
    units: str | None,
    densities=None,
    *,
    lumped=(),
    frame: HubFrame | None = None,
    reference_radius_m: float | None = None,
    reference_fraction: float = 0.75,
    elements: bool = True,
    max_element_volume_m3: float | None = None,
    target_elements: int | None = None,
    name: str | None = None,
    model_transform=None,
    field_faces: int | None = None,
    progress=None,
    angle_line: str = "chord",
    check=None,
    cad_tolerance: float | None = None,
    weld_tol: float | None = None,
    repair: bool = False,
    repair_limit_pct: float = 1.0,
) -> Blade:
    """Load, validate, mesh and integrate a blade.

    path : mesh file (STL, OBJ, PLY, OFF surface or .msh/.vtu/.inp tetrahedra) or CAD file
      (STEP, IGES, BREP; docs/CONVENTIONS.md §9)
    units : declared length unit of the file (``mm``, ``cm``, ``m``, ``in``, ``ft``); None for
      a STEP or IGES file takes the unit it declares (a unit given must agree with it)
    densities : list of ``("density", "2810 kg/m^3")`` / ``("material", "al-2025-t6")``,
      or plain strings/numbers (densities), one for all bodies or one per body
    lumped : iterable of :class:`LumpedMass` (model frame positions, m)
    frame : hub frame in the model frame (default: identity, right-hand rotation)
    reference_radius_m : reference station for the blade angle (default: fraction × tip radius)
    elements : build the tetrahedral mass elements (False: surface route only, faster)
    field_faces : element fields are built on a simplified copy of surfaces with more faces
      than this (default :data:`DEFAULT_FIELD_FACES`); mass, tensor and loads stay exact
    model_transform : optional 4x4 rigid transform (m) applied to the mesh on load, e.g. the
      registration that puts a scanned blade into its nominal's model frame
    progress : optional callable(stage: str) told when each stage starts
    angle_line : the reference line of the modelled blade angle, ``"chord"`` (nose to tail) or
      ``"face"`` (a straightedge on the face); both angles are kept (docs/CONVENTIONS.md §2)
    check : optional callable(blade) → warnings, run on the surface-route blade before the mass
      elements are built: it may refuse (raise :class:`InputError`) before the costly meshing,
      and the warnings it returns are added to the blade's

    An element request beyond :func:`bladesolid.bounds.element_budget` (too many elements for
    the limit or for this machine's memory) is refused before meshing, naming
    ``max_element_volume_m3`` or ``target_elements``.
    cad_tolerance : chord tolerance of a CAD file's triangulation, a fraction of the model's
      bounding-box diagonal (default :data:`bladesolid.cad.DEFAULT_CAD_TOLERANCE`). The mass
      moments of a CAD solid come from its curved triangles (exact for the solid to ~1e-5);
      the mass elements fill the straight triangulation, so they are not exact for the solid
      (``Blade.elements_exact`` is False) and their volume difference is reported
    weld_tol : weld vertices of a surface closer than this, in the mesh unit, always (default:
      at 1e-6 of the bounding-box diagonal, only when the surface is open as read)
    repair : mend a damaged surface first (:func:`bladesolid.repair.repair_surface` per part),
      every change in ``Blade.repairs``; refused when the volume changes by more than
      ``repair_limit_pct`` percent (docs/CONVENTIONS.md §8)

    A flat bar 40 × 600 × 10 mm from r = 100 mm to 700 mm, aluminium, at 1000 rpm:

    >>> import os, tempfile, trimesh
    >>> bar = trimesh.creation.box([40.0, 600.0, 10.0]); _ = bar.apply_translation([0.0, 400.0, 0.0])
    >>> path = os.path.join(tempfile.mkdtemp(), "bar.stl"); _ = bar.export(path)
    >>> blade = load_blade(path, "mm", ["2700 kg/m^3"], elements=False)
    >>> round(mass_properties(blade).mass_kg, 6)            # ρ V = 2700 × 0.04 × 0.6 × 0.01
    0.648
    >>> op = loads_at(blade, rpm=1000, pitch_change_deg=0.0)
    >>> round(op.radial_pull_N, 1), abs(op.ctm_Nm) < 1e-9   # m Ω² r_cg; no CTM flat in the plane
    (2842.4, True)
    """
    from .frame import check_angle_line
    from .io import read_mesh

    check_angle_line(angle_line)
    say = progress or (lambda stage: None)
    frame = frame or hub_frame()
    say("load")
    loaded = read_mesh(path, units, cad_tolerance=cad_tolerance, weld_tol=weld_tol, repair=repair,
                       repair_limit_pct=repair_limit_pct)
    bodies = loaded.bodies
    if densities is not None and not isinstance(densities, (list, tuple)):
        densities = [densities]
    specs = [d if isinstance(d, tuple) else ("density", d) for d in (densities or [])]
    mats = resolve_materials(specs, len(bodies), inserts=[(b.name, b.host) for b in bodies if b.host])
    R, t = frame.model_to_hub()
    if model_transform is not None:
        T = np.asarray(model_transform, dtype=float)
        R, t = R @ T[:3, :3], R @ T[:3, 3] + t
    surfaces = tuple((b.vertices @ R.T + t, np.asarray(b.faces, dtype=np.int64)) for b in bodies)
    say("integrate surface")
    exact = None
    if loaded.cad is not None:  # the curved triangles' moments of each solid, into the hub frame
        from .moments import moved

        exact = [moved(m, R, t) for m in loaded.cad.moments]
    blade = blade_from_surfaces(
        surfaces, mats, frame, lumped=lumped, reference_radius_m=reference_radius_m,
        reference_fraction=reference_fraction, name=name or str(path).replace("\\", "/").rsplit("/", 1)[-1],
        source=str(path), units=loaded.units, warnings=loaded.warnings, angle_line=angle_line,
        body_moments=exact,
    )
    if check is not None:
        extra = tuple(check(blade) or ())
        if extra:
            blade = replace(blade, warnings=blade.warnings + extra)
    if loaded.cad is not None:
        from .cad import blade_section

        blade = replace(blade, cad=blade_section(loaded.cad, R, t, [m.density_kg_m3 for m in mats]))
    blade = replace(blade, geometry=loaded.geometry, repairs=loaded.repairs, mended_surface=loaded.mended)
    if all(b.tets is not None for b in bodies):
        elements = True  # a volume mesh brings its elements: no meshing, so always use them
    if not elements:
        return blade
    _check_element_request(blade.volume_m3, max_element_volume_m3, target_elements,
                           meshed=any(b.tets is None for b in bodies) or max_element_volume_m3 is not None
                           or target_elements is not None)
    from .mesh import mass_elements
    from .moments import tet_volume_moments

    say("mesh")
    warnings = list(blade.warnings)
    hub_bodies = [type(b)(b.name, v, f, b.tets) for b, (v, f) in zip(bodies, surfaces)]
    limit = DEFAULT_FIELD_FACES if field_faces is None else int(field_faces)
    field_info = None
    if any(b.tets is None and len(b.faces) > limit for b in hub_bodies):
        volumes = [abs(m.mass) / mat.density_kg_m3 for m, mat in zip(blade.body_moments, mats)]
        if loaded.cad is not None:  # the copy simplifies the straight triangles: measured against them
            volumes = [abs(m.mass) for m in loaded.cad.straight_moments]
        hub_bodies, field_info = _field_copies(hub_bodies, volumes, limit)
        warnings.append(
            f"element fields on a simplified copy ({field_info['faces_field']} of {field_info['faces_full']} "
            f"faces, volume change {field_info['volume_change']:+.2e}); mass, tensor and loads stay exact from "
            "the full surface (give --field-faces to change)"
        )
    tm = mass_elements(hub_bodies, max_volume=max_element_volume_m3, target_elements=target_elements, source=str(path))
    say("integrate elements")
    vol = tet_volume_moments(tm.nodes, tm.tets)
    rho = np.array([m.density_kg_m3 for m in mats])[tm.body]
    el = ElementMoments(vol.mass * rho, vol.first * rho[:, None], vol.second * rho[:, None, None])
    if field_info is not None:
        field_info["moments_rel_difference"] = relative_difference(el.total(), blade.surface_moments)
    cad_info = blade.cad
    if cad_info is not None:  # the elements fill the straight triangles, not the curved solid
        cad_info = {**cad_info, "elements_volume_rel_difference": float(vol.mass.sum()) / blade.volume_m3 - 1.0,
                    "elements_rel_difference": relative_difference(el.total(), blade.surface_moments)}
    return replace(blade, elements=el, element_nodes=tm.nodes, element_tets=tm.tets, element_body=tm.body,
                   field_resolution=field_info, warnings=tuple(warnings), cad=cad_info)


def _check_element_request(volume_m3: float, max_volume_m3, target, meshed: bool) -> None:
    """Refuse (naming the parameter) an element request beyond :func:`bladesolid.bounds.element_budget`."""
    from . import bounds

    if not meshed:
        return
    if max_volume_m3 is not None:
        if not (math.isfinite(max_volume_m3) and max_volume_m3 > 0):
            raise InputError("max_element_volume_m3", f"must be a positive volume in m^3, got {max_volume_m3!r}")
        count, problem = bounds.element_budget(volume_m3, max_volume_m3=max_volume_m3)
        if problem:
            least = volume_m3 / bounds.allowed_elements()
            raise InputError("max_element_volume_m3", f"{max_volume_m3:.3g} m^3 would give about {count:.3g} mass "
                                                      f"elements for this solid ({volume_m3:.3g} m^3), {problem}; "
                                                      f"give at least {least:.3g} m^3")
    elif target is not None:
        if int(target) < 1:
            raise InputError("target_elements", f"must be at least 1, got {target!r}")
        _, problem = bounds.element_budget(volume_m3, target=int(target))
        if problem:
            raise InputError("target_elements", f"{int(target):,} mass elements, {problem}; give at most "
                                                f"{bounds.allowed_elements():,}")


def blade_from_surfaces(surfaces, materials, frame: HubFrame, *, lumped=(), reference_radius_m: float | None = None,
                        reference_fraction: float = 0.75, name: str = "blade", source: str = "surfaces",
                        units: str = "m", warnings=(), angle_line: str = "chord", body_moments=None) -> Blade:
    """The surface route: a :class:`Blade` (no mass elements) from closed surfaces already in
    the hub frame.

    surfaces : per body ``(vertices (n, 3) m, faces (m, 3))``, hub frame, outward wound
    materials : one :class:`BodyMaterial` per body (see :func:`resolve_materials`)
    lumped : :class:`LumpedMass` es (model frame positions, m)
    reference_radius_m : reference station of the blade angle (default: fraction × tip radius)
    angle_line : reference line of the blade angle, ``"chord"`` or ``"face"`` (docs/CONVENTIONS.md §2)
    body_moments : optional per-body :class:`~bladesolid.moments.Moments` at unit density, hub
      frame, of the solids the surfaces approximate (the curved triangles of CAD input); by
      default each body's closed-surface integral

    Each body's moments are the exact closed-surface integral (or the given ``body_moments``)
    times its density; a body whose
    tensor no solid can have (a surface that crosses itself or is wound inside out) is refused
    (:func:`bladesolid.moments.check_physical_inertia`), never reported. The blade angle is
    measured at the reference station (a warning, not an error, when it cannot be).
    A density outside the usual range of solids is a warning (:func:`bladesolid.bounds.density_warning`).
    """
    from .bounds import density_warning
    from .moments import check_physical_inertia, surface_volume_moments

    surfaces = tuple((np.asarray(v, dtype=float), np.asarray(f, dtype=np.int64)) for v, f in surfaces)
    materials = tuple(materials)
    warnings = list(warnings)
    for mat in dict.fromkeys(materials):
        odd = density_warning(mat.density_kg_m3, mat.label)
        if odd and odd not in warnings:
            warnings.append(odd)
    if body_moments is None:
        body_moments = [surface_volume_moments(v, f) for v, f in surfaces]
    body_moments = tuple(m.scaled(mat.density_kg_m3) for m, mat in zip(body_moments, materials))
    for i, m in enumerate(body_moments):
        check_physical_inertia(m, source if len(body_moments) == 1 else f"{source}: body {i + 1}")
    lumped = tuple(lumped)
    lumped_moments = zero_moments()
    for p in lumped:
        lumped_moments = lumped_moments + point_mass(p.mass_kg, frame.to_hub(p.position_m))
    tip = float(max(v[:, 1].max() for v, _ in surfaces))
    if reference_radius_m is None:
        reference_radius_m = reference_fraction * tip
    angle = None
    try:
        angle = measure_blade_angle(surfaces, frame, reference_radius_m, source=source, line=angle_line)
    except InputError as exc:
        warnings.append(f"blade angle not measured: {exc.problem}")
    return Blade(name=name, source=source, units=units, frame=frame, materials=materials, surfaces=surfaces,
                 body_moments=body_moments, lumped=lumped, lumped_moments=lumped_moments, tip_radius_m=tip,
                 reference_radius_m=float(reference_radius_m), modelled_angle=angle, warnings=tuple(warnings))


#: Surfaces with more faces than this get their element fields on a simplified copy
#: (mass, tensor and loads always come from the full surface). Measured (scripts/bench.py):
#: TetGen fills a 20 000-face simplified blade in ~0.5 s, while the 240 000-face blade takes
#: 60–115 s, and simplified copies above ~35 000 faces can take over a minute.
DEFAULT_FIELD_FACES = 20_000


def _field_copies(bodies, volumes, target_faces: int):
    """Bodies with their surfaces simplified to about ``target_faces`` faces in all (for the
    element fields only), and a record of what was done. ``volumes``: the bodies' exact
    volumes, m³ (already integrated from the full surfaces)."""
    from .fieldres import field_surface
    from .moments import surface_volume_moments

    total = sum(len(b.faces) for b in bodies)
    out, methods = [], []
    vol_field = 0.0
    for b, vol in zip(bodies, volumes):
        if b.tets is not None:  # a volume mesh keeps its own elements
            out.append(b)
            vol_field += vol
            continue
        share = max(200, int(target_faces * len(b.faces) / total))
        report = {}
        v, f = field_surface(b.vertices, b.faces, share, report=report)
        methods.append(report.get("method", "input"))
        out.append(type(b)(b.name, v, f, None))
        vol_field += abs(surface_volume_moments(v, f).mass)
    vol_full = sum(volumes)
    info = {"faces_full": total, "faces_field": sum(len(b.faces) for b in out), "methods": methods,
            "volume_change": vol_field / vol_full - 1.0 if vol_full else 0.0}
    return out, info


# --- mass properties ------------------------------------------------------------------


@dataclass(frozen=True)
class MassProperties:
    """Mass properties of the blade (bodies + lumped masses) at the modelled position,
    hub frame, SI (docs/CONVENTIONS.md §6 ``mass_properties``)."""

    mass_kg: float
    volume_m3: float
    cg_m: np.ndarray
    inertia_hub_kgm2: np.ndarray
    inertia_cg_kgm2: np.ndarray
    principal_moments_kgm2: np.ndarray
    principal_axes: np.ndarray
    static_moment_kgm: float
    surface_check_rel_error: float
    surface_check_method: str

    @property
    def surface_check_ok(self) -> bool:
        """True when the two independent routes agree to round-off (≤ SURFACE_CHECK_TOLERANCE)."""
        return bool(self.surface_check_rel_error <= SURFACE_CHECK_TOLERANCE)


#: Largest relative disagreement between the two routes to the moments that counts as
#: round-off (both are exact for the same closed surface; double precision).
SURFACE_CHECK_TOLERANCE = 1e-9


def principal_axes(inertia: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Principal moments (ascending) and axes (columns, right-handed, each with its largest
    component positive) of a symmetric inertia tensor."""
    w, v = np.linalg.eigh(0.5 * (inertia + inertia.T))
    for j in range(3):
        if v[np.argmax(np.abs(v[:, j])), j] < 0:
            v[:, j] = -v[:, j]
    if np.linalg.det(v) < 0:
        v[:, 2] = -v[:, 2]
    return w, v


def surface_check(blade: Blade) -> tuple[float, str]:
    """Disagreement between two independent routes to the solid's moments and how it was got.

    Meshed: tetrahedral elements against the closed-surface integral. Surface only: our
    surface integral against trimesh's independent mass-property integration. CAD input: the
    same checks on the straight triangulation (the elements fill it, trimesh integrates it);
    the curved triangles' figures are weighed against the kernel's instead (``Blade.cad``).
    """
    if blade.elements_exact:
        return relative_difference(blade.elements.total(), blade.surface_moments), "elements vs closed surface"
    if blade.cad is not None:
        return _tessellation_check(blade)
    import trimesh

    total = zero_moments()
    for (v, f), mat in zip(blade.surfaces, blade.materials):
        mesh = trimesh.Trimesh(v, f, process=False)
        mp = mesh.mass_properties
        vol = float(mp["volume"])
        c = np.asarray(mp["center_mass"])
        I_c = np.asarray(mp["inertia"]) / mp["density"]  # per unit density, about the centre
        S_c = 0.5 * np.trace(I_c) * np.eye(3) - I_c
        m = Moments(vol, vol * c, S_c + vol * np.outer(c, c)).scaled(mat.density_kg_m3)
        total = total + m
    return relative_difference(total, blade.surface_moments), "closed surface vs trimesh mass properties"


def _tessellation_check(blade: Blade) -> tuple[float, str]:
    """:func:`surface_check` of CAD input, on the straight triangulation of its solids."""
    import trimesh

    from .moments import surface_volume_moments

    ours, theirs = zero_moments(), zero_moments()
    for (v, f), mat in zip(blade.surfaces, blade.materials):
        ours = ours + surface_volume_moments(v, f).scaled(mat.density_kg_m3)
        if blade.elements is None or blade.field_resolution is not None:
            mp = trimesh.Trimesh(v, f, process=False).mass_properties
            vol, c = float(mp["volume"]), np.asarray(mp["center_mass"])
            I_c = np.asarray(mp["inertia"]) / mp["density"]
            S_c = 0.5 * np.trace(I_c) * np.eye(3) - I_c
            theirs = theirs + Moments(vol, vol * c, S_c + vol * np.outer(c, c)).scaled(mat.density_kg_m3)
    if blade.elements is not None and blade.field_resolution is None:
        return relative_difference(blade.elements.total(), ours), "elements vs triangulated CAD surface"
    return relative_difference(theirs, ours), "triangulated CAD surface vs trimesh mass properties"


def mass_properties(blade: Blade) -> MassProperties:
    """Mass, CG, inertia tensors, principal axes and static moment (hub frame, modelled)."""
    m = blade.moments
    I_hub = m.inertia()
    I_cg = m.inertia_cg()
    w, v = principal_axes(I_cg)
    err, how = surface_check(blade)
    return MassProperties(
        mass_kg=float(m.mass),
        volume_m3=blade.volume_m3,
        cg_m=m.cg,
        inertia_hub_kgm2=I_hub,
        inertia_cg_kgm2=I_cg,
        principal_moments_kgm2=w,
        principal_axes=v,
        static_moment_kgm=float(static_moment(m, blade.frame.k)),
        surface_check_rel_error=err,
        surface_check_method=how,
    )


# --- loads ------------------------------------------------------------------------------


def resolve_blade_angle(blade: Blade, blade_angle_deg: float | None = None,
                        pitch_change_deg: float | None = None) -> float:
    """Absolute blade angle (deg) from an absolute angle or a change from the modelled one
    (neither: the modelled angle). An absolute angle needs the modelled angle measured at the
    reference station, since the blade is turned from there.
    """
    from .bounds import check_angle

    if blade_angle_deg is not None and pitch_change_deg is not None:
        raise InputError("blade_angle_deg", "give either blade_angle_deg or pitch_change_deg, not both")
    if pitch_change_deg is not None:
        check_angle(pitch_change_deg, "pitch_change_deg", "pitch change")
    if blade_angle_deg is not None:
        check_angle(blade_angle_deg, "blade_angle_deg")
        if blade.modelled_angle is None:
            raise InputError(blade.source, "the modelled blade angle could not be measured at the reference station; "
                                           "give pitch_change_deg (a change from the modelled angle) instead")
        return float(blade_angle_deg)
    return blade.modelled_deg + float(pitch_change_deg or 0.0)


def loads_at(blade: Blade, rpm: float, blade_angle_deg: float | None = None,
             pitch_change_deg: float | None = None, name: str = "") -> OperatingLoads:
    """Centrifugal loads at ``rpm`` and an absolute blade angle (or a pitch change)."""
    from .bounds import check_rpm, tip_speed_check

    check_rpm(rpm, "rpm")
    tip_speed_check(rpm, blade.tip_radius_m, "rpm")  # refuses beyond any material; the job route warns
    beta = resolve_blade_angle(blade, blade_angle_deg, pitch_change_deg)
    return operating_loads(blade.moments, blade.frame, blade.modelled_deg, beta, rpm, name=name,
                           curve=blade.ctm_curve)


def loads_for_job(blade: Blade, job) -> list[OperatingLoads]:
    """Loads at every operating point of a :class:`bladesolid.job.Job` (in its order)."""
    return [loads_at(blade, o.rpm, o.blade_angle_deg, o.pitch_change_deg, name=o.name) for o in job.operating_points]


def pitch_sweep(blade: Blade, rpm: float, lo_deg: float, hi_deg: float, step_deg: float):
    """(β (deg), CTM (N·m), pitch stiffness (N·m/rad)) arrays over a blade-angle range."""
    from .bounds import MAX_SWEEP_POINTS, check_angle, check_rpm
    from .job import range_points

    check_rpm(rpm, "rpm")
    for v in (lo_deg, hi_deg):
        check_angle(v, "lo_deg:hi_deg:step_deg", "the sweep's ends")
    if step_deg > 0 and (hi_deg - lo_deg) / step_deg >= MAX_SWEEP_POINTS:
        raise InputError("lo_deg:hi_deg:step_deg", f"asks for more than {MAX_SWEEP_POINTS:,} points; give a larger step")
    betas = range_points(lo_deg, hi_deg, step_deg, "lo_deg:hi_deg:step_deg")
    omega = rpm_to_rad_s(rpm)
    return betas, blade.ctm_curve.ctm(betas, omega), blade.ctm_curve.pitch_stiffness(betas, omega)


# --- from a job ---------------------------------------------------------------------------


def surface_options(job) -> dict:
    """The loader's keywords of a job (``weld_tol`` in the mesh unit, ``repair``,
    ``repair_limit_pct``) for :func:`load_blade` and :func:`bladesolid.io.read_mesh`."""
    from .units import length_scale

    weld_m = getattr(job, "weld_m", None)
    return {"weld_tol": None if weld_m is None else weld_m / length_scale(job.units, job.source),
            "repair": bool(getattr(job, "repair", False)),
            "repair_limit_pct": float(getattr(job, "repair_limit_pct", 1.0))}


def blade_from_job(job, *, elements: bool = True, model_transform=None, progress=None) -> Blade:
    """Load the blade a validated :class:`bladesolid.job.Job` describes (``model_transform``:
    an optional 4x4 applied to the mesh first, see :func:`load_blade`)."""
    from .job import check_against_blade, check_pitch_point, hub_frame_of

    frame = hub_frame_of(job)
    lumped = tuple(LumpedMass(n, m, np.asarray(p, float)) for n, m, p in job.lumped)
    blade = load_blade(
        job.mesh,
        job.units,
        list(job.densities),
        lumped=lumped,
        frame=frame,
        reference_radius_m=job.reference_radius_m,
        reference_fraction=job.reference_fraction,
        elements=elements,
        max_element_volume_m3=None if job.element_size_m is None else job.element_size_m**3 / (6.0 * math.sqrt(2.0)),
        target_elements=job.elements,
        name=job.name,
        model_transform=model_transform,
        field_faces=job.field_faces,
        progress=progress,
        angle_line=job.angle_line,
        check=lambda b: check_against_blade(job, b),
        cad_tolerance=job.cad_tolerance,
        **surface_options(job),
    )
    if job.pitch_point_m is not None:
        check_pitch_point(frame, blade.moments.cg, blade.tip_radius_m, f"{job.source}")
    return blade
