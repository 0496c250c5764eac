"""A repaired or re-profiled blade against its reference: registration, deviation, volumes, deltas, verdict.

Both blades are analysed in the reference's hub frame (docs/CONVENTIONS.md §1): signed
deviation of every repaired vertex from the reference surface, the removed and added volumes,
and the deltas, repaired minus reference, of the mass figures and of the centrifugal loads at
one operating point; then the user's limits, when given, decide the verdict.

Frames: the reference blade arrives as a :class:`bladesolid.api.Blade` (hub frame); the
transform reported maps the repaired mesh's own coordinates (m) to the reference's model
coordinates (m), and ``transform_to_hub`` to the reference's hub frame.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

from ..errors import InputError
from ..loads import OperatingLoads, operating_loads, static_moment
from ..moments import Moments
from .deviation import Deviation, boolean_volumes, signed_deviation
from .limits import LIMITS_NOTE, LimitCheck, Limits, check_limits
from .query import SurfaceQuery, merge_surfaces
from .registration import Registration, given_registration, register
from .transforms import apply_transform, invert_rigid, rigid_matrix, rotation_angle_deg

__all__ = ["BladeFigures", "Comparison", "Delta", "blade_figures", "compare_blade", "comparison_section"]


@dataclass(frozen=True)
class BladeFigures:
    """Mass figures (modelled / registered position) and loads at one operating point of a
    blade given by its closed surfaces in a hub frame (SI).

    modelled_deg : blade angle measured at the reference station (None: not measured)
    loads : the operating point (blade set to ``loads.blade_angle_deg`` at that station)
    """

    name: str
    moments: Moments
    volume_m3: float
    mass_kg: float
    cg_m: np.ndarray
    static_moment_kgm: float
    modelled_deg: float | None
    loads: OperatingLoads


def blade_figures(blade, rpm: float, blade_angle_deg: float, *, modelled_fallback_deg: float = 0.0) -> BladeFigures:
    """Figures of a blade analysed from its closed surfaces (a :class:`bladesolid.api.Blade` of
    the surface route, :func:`bladesolid.api.blade_from_surfaces`): its mass figures as
    modelled (registered), and its loads with the blade set to ``blade_angle_deg`` measured at
    its reference station. When the station cannot be measured the modelled angle is taken as
    ``modelled_fallback_deg``.
    """
    m = blade.moments
    modelled = None if blade.modelled_angle is None else blade.modelled_angle.angle_deg
    base = modelled if modelled is not None else modelled_fallback_deg
    ops = operating_loads(m, blade.frame, base, float(blade_angle_deg), rpm, name=blade.name)
    return BladeFigures(blade.name, m, blade.volume_m3, float(m.mass), m.cg, float(static_moment(m, blade.frame.k)),
                        modelled, ops)


@dataclass(frozen=True)
class Delta:
    """This blade minus the reference (SI, reference hub frame)."""

    mass_kg: float
    volume_m3: float
    cg_m: np.ndarray
    cg_shift_m: float
    static_moment_kgm: float
    radial_pull_N: float
    ctm_Nm: float
    blade_angle_deg: float | None


@dataclass(frozen=True)
class Comparison:
    """A repaired blade against its reference (see :func:`compare_blade`)."""

    reference_name: str
    reference_source: str
    repaired_name: str
    repaired_source: str
    registration: Registration
    transform_model: np.ndarray  # repaired model frame (m) -> reference model frame (m)
    deviation: Deviation
    removed_volume_m3: float
    added_volume_m3: float
    reference: BladeFigures
    repaired: BladeFigures
    rpm: float
    blade_angle_deg: float
    reference_radius_m: float
    delta: Delta
    limits: Limits | None
    checks: tuple[LimitCheck, ...]
    warnings: tuple[str, ...] = field(default_factory=tuple)

    @property
    def verdict(self) -> str:
        """``"within limits"`` / ``"outside limits"`` (docs/CONVENTIONS.md: exactly these two values).

        Without a limits file nothing is checked: "within limits" with ``limits_checked`` false.
        """
        if self.limits is None:
            return "within limits"
        return "within limits" if all(c.within for c in self.checks) else "outside limits"

    @property
    def limits_checked(self) -> bool:
        """True when a limits file was given and its limits were checked."""
        return self.limits is not None

    @property
    def reasons(self) -> list[str]:
        return [c.reason for c in self.checks if not c.within]

    def figures(self) -> dict:
        """The figures a limits file can name (SI)."""
        d = self.delta
        return {
            "mass": d.mass_kg, "static_moment": d.static_moment_kgm, "radial_pull": d.radial_pull_N,
            "ctm": d.ctm_Nm, "blade_angle": d.blade_angle_deg, "cg_shift": d.cg_shift_m,
            "max_deviation": self.deviation.max_inward_m, "max_added_deviation": self.deviation.max_outward_m,
            "removed_volume": self.removed_volume_m3, "added_volume": self.added_volume_m3,
            "registration_rms": self.registration.rms_m,
        }


def _repaired_materials(reference, n_bodies: int, source: str) -> tuple:
    """The reference's materials for the bodies of the repaired mesh: one per body when the
    counts agree, else the reference's single density for every body."""
    mats = tuple(reference.materials)
    if n_bodies == len(mats):
        return mats
    if len({m.density_kg_m3 for m in mats}) == 1:
        return mats[:1] * n_bodies
    raise InputError(source, f"the repaired mesh has {n_bodies} bodies and the reference {len(mats)} bodies of "
                             "different densities; bodies cannot be paired for their densities")


def compare_blade(reference, repaired_surfaces, rpm: float, *, blade_angle_deg: float | None = None,
                  pitch_change_deg: float | None = None, transform: np.ndarray | None = None,
                  limits: Limits | None = None, repaired_name: str = "repaired", repaired_source: str = "mesh",
                  keep_fraction: float = 0.9, samples: int = 4000, seed: int = 0,
                  volumes: bool = True) -> Comparison:
    """Compare a repaired blade with its reference.

    reference : a :class:`bladesolid.api.Blade` (hub frame; its materials, lumped masses and
      reference station are used for both blades)
    repaired_surfaces : ``[(vertices (n, 3) m, faces (m, 3)), ...]`` in the repaired mesh's own
      frame (a scan's frame, or the reference's model frame)
    rpm, blade_angle_deg | pitch_change_deg : the operating point. Both blades are set to the
      same blade angle, each measured at the reference's station (as a blade is set in the hub):
      ``blade_angle_deg``, or the reference's modelled angle plus ``pitch_change_deg``
      (default: the reference's modelled angle)
    transform : (4, 4) repaired → reference *model* frame (m), or None to register
    limits : the user's limits, or None (nothing checked; ``limits_checked`` false)

    Deltas are repaired minus reference, in the reference's hub frame.
    """
    from ..api import blade_from_surfaces, resolve_blade_angle

    frame = reference.frame
    warnings = []
    beta = resolve_blade_angle(reference, blade_angle_deg, pitch_change_deg)  # both blades set to it
    ref_surfaces = [(np.asarray(v, float), np.asarray(f, np.int64)) for v, f in reference.surfaces]
    rep = [(np.asarray(v, float), np.asarray(f, np.int64)) for v, f in repaired_surfaces]
    fixed = merge_surfaces(ref_surfaces)
    moving = merge_surfaces(rep)
    query = SurfaceQuery(*fixed)
    Rh, th = frame.model_to_hub()
    H = rigid_matrix(Rh, th)  # reference model frame -> hub frame
    if transform is None:
        reg = register(moving, fixed, keep_fraction=keep_fraction, samples=samples, seed=seed, fixed_query=query)
        T_hub = reg.transform
    else:
        T_hub = H @ np.asarray(transform, dtype=float)
        reg = given_registration(T_hub, moving, fixed, keep_fraction=keep_fraction, samples=samples, seed=seed,
                                 fixed_query=query)
    T_model = invert_rigid(H) @ T_hub
    if reg.rms_m > 1e-3 * max(reference.tip_radius_m, 1e-9):
        warnings.append(f"registration RMS {reg.rms_m * 1e3:.3g} mm is more than 0.1 % of the tip radius; check that "
                        "the two meshes are the same blade (and the transform, if given)")  # common practice, no source
    reg_surfaces = [(apply_transform(T_hub, v), f) for v, f in rep]
    rv, rf = merge_surfaces(reg_surfaces)
    deviation = Deviation(signed_deviation(rv, query), rv, rf)
    if volumes:
        removed, added = boolean_volumes(ref_surfaces, reg_surfaces, reference.source, repaired_source)
        if min(removed, added) < -1e-9 * max(abs(reference.volume_m3), 1e-300):  # no volume is negative
            raise InputError(repaired_source, f"the boolean volumes came out negative (removed {removed:.4g} m^3, added "
                                              f"{added:.4g} m^3); a surface is probably self-intersecting")
    else:
        removed = added = float("nan")

    base = reference.modelled_deg
    line = reference.modelled_angle.reference_line if reference.modelled_angle is not None else "chord"
    common = dict(lumped=reference.lumped, reference_radius_m=reference.reference_radius_m, units=reference.units,
                  angle_line=line)
    ref_blade = blade_from_surfaces(ref_surfaces, reference.materials, frame, name=reference.name,
                                    source=reference.source, **common)
    rep_blade = blade_from_surfaces(reg_surfaces, _repaired_materials(reference, len(rep), repaired_source), frame,
                                    name=repaired_name, source=repaired_source, **common)
    fig_ref = blade_figures(ref_blade, rpm, beta, modelled_fallback_deg=base)
    fig_rep = blade_figures(rep_blade, rpm, beta, modelled_fallback_deg=base)
    if fig_rep.modelled_deg is None:
        warnings.append(f"the repaired blade's angle could not be measured at r = {reference.reference_radius_m:.4g} m; "
                        "it is taken as registered (same rigid pitch setting as the reference)")
    dcg = fig_rep.cg_m - fig_ref.cg_m
    delta = Delta(
        mass_kg=fig_rep.mass_kg - fig_ref.mass_kg,
        volume_m3=fig_rep.volume_m3 - fig_ref.volume_m3,
        cg_m=dcg,
        cg_shift_m=float(np.linalg.norm(dcg)),
        static_moment_kgm=fig_rep.static_moment_kgm - fig_ref.static_moment_kgm,
        radial_pull_N=fig_rep.loads.radial_pull_N - fig_ref.loads.radial_pull_N,
        ctm_Nm=fig_rep.loads.ctm_Nm - fig_ref.loads.ctm_Nm,
        blade_angle_deg=(None if fig_rep.modelled_deg is None or fig_ref.modelled_deg is None
                         else fig_rep.modelled_deg - fig_ref.modelled_deg),
    )
    cmp = Comparison(reference.name, reference.source, repaired_name, repaired_source, reg, T_model, deviation,
                     removed, added, fig_ref, fig_rep, float(rpm), beta, reference.reference_radius_m, delta,
                     limits, (), tuple(warnings))
    if limits is not None:
        cmp = replace(cmp, checks=check_limits(limits, cmp.figures()))
    return cmp


def _figures_section(b: BladeFigures) -> dict:
    o = b.loads
    return {
        "name": b.name,
        "mass_kg": b.mass_kg,
        "volume_m3": b.volume_m3,
        "cg_m": b.cg_m,
        "static_moment_kgm": b.static_moment_kgm,
        "modelled_blade_angle_deg": b.modelled_deg,
        "blade_angle_deg": o.blade_angle_deg,
        "radial_pull_N": o.radial_pull_N,
        "ctm_Nm": o.ctm_Nm,
        "cf_N": o.cf_N,
        "moment_hub_Nm": o.moment_hub_Nm,
        "feathering_inertia_kgm2": o.feathering_inertia_kgm2,
        "pitch_stiffness_Nm_per_rad": o.pitch_stiffness_Nm_per_rad,
    }


def comparison_section(c: Comparison) -> dict:
    """The ``comparison`` key of the report (docs/CONVENTIONS.md §7), plus documented extra keys."""
    r = c.registration
    d = c.delta
    dev = c.deviation
    out = {
        "reference": {"name": c.reference_name, "mesh": c.reference_source},
        "repaired": {"name": c.repaired_name, "mesh": c.repaired_source},
        "registration": {
            "rms_m": r.rms_m,
            "max_m": r.max_m,
            "transform": c.transform_model,
            "transform_frames": "repaired mesh coordinates (m) -> reference model frame (m); r' = R r + t",
            "transform_to_hub": r.transform,
            "rotation_deg": rotation_angle_deg(c.transform_model[:3, :3]),
            "translation_m": c.transform_model[:3, 3],
            "rms_all_m": r.rms_all_m,
            "max_all_m": r.max_all_m,
            "kept_fraction": r.kept_fraction,
            "points": r.points,
            "iterations": r.iterations,
            "method": r.method,
            "start": r.start,
            "seed": r.seed,
            "residuals": "distance of seeded surface samples of the repaired blade to the reference surface; "
                         "rms_m/max_m over the kept fraction, *_all_m over all samples",
        },
        "removed_volume_m3": c.removed_volume_m3,
        "added_volume_m3": c.added_volume_m3,
        "volume_method": "manifold3d boolean differences reference - repaired (removed) and repaired - reference (added)",
        "delta": {
            "mass_kg": d.mass_kg,
            "cg_m": d.cg_m,
            "static_moment_kgm": d.static_moment_kgm,
            "radial_pull_N": d.radial_pull_N,
            "ctm_Nm": d.ctm_Nm,
            "blade_angle_deg": d.blade_angle_deg,
            "cg_shift_m": d.cg_shift_m,
            "volume_m3": d.volume_m3,
        },
        "delta_definition": "repaired minus reference, reference hub frame; mass figures at the modelled (registered) "
                            "position, loads at the operating point",
        "deviation": {
            "min_m": dev.min_m,
            "max_m": dev.max_m,
            "rms_m": dev.rms_m,
            "mean_m": dev.mean_m,
            "max_inward_m": dev.max_inward_m,
            "max_outward_m": dev.max_outward_m,
            "vertices": int(len(dev.values)),
            "sign": "signed distance of each repaired vertex from the reference surface: negative inside "
                    "(material missing), positive outside (material added)",
        },
        "operating_point": {
            "rpm": c.rpm,
            "blade_angle_deg": c.blade_angle_deg,
            "reference_radius_m": c.reference_radius_m,
            "setting": "each blade set to this blade angle measured at the reference station of the reference blade",
        },
        "reference_blade": _figures_section(c.reference),
        "repaired_blade": _figures_section(c.repaired),
        "verdict": c.verdict,
        "limits_checked": c.limits_checked,
        "reasons": c.reasons,
        "limits_note": LIMITS_NOTE,
        "limits": None if c.limits is None else {
            "file": c.limits.path,
            "source": c.limits.source,
            "note": c.limits.note,
            "checked": [
                {"key": x.limit.key, "figure": x.limit.figure, "kind": x.limit.kind, "low_si": x.limit.low,
                 "high_si": x.limit.high, "as_written": x.limit.text, "value_si": x.value, "within": x.within}
                for x in c.checks
            ],
        },
        "warnings": list(c.warnings),
    }
    return out
