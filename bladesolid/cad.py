"""Blade solids straight from CAD files: STEP, IGES and BREP through OpenCASCADE.

The OpenCASCADE kernel comes with the ``gmsh`` wheel (GPL; the optional extra
``pip install 'bladesolid[cad]'``). One front door, :func:`read_cad`, which

1. checks the file (exists, regular, not empty, not truncated, the right kind of text) and
   reads the length unit the file declares (:func:`declared_unit`): STEP from the length unit
   its representation contexts use (``SI_UNIT(.MILLI.,.METRE.)``, a conversion-based unit such
   as the inch), IGES from global-section parameters 14/15 (units flag / name); BREP declares
   none, so ``units`` is required for it. A ``units`` given for a STEP or IGES file must agree
   with the declared unit;
2. reads the file in a child process (a crash or a hang of the kernel cannot take the caller
   down, the kernel's console output never reaches the caller's stdout/stderr, and the
   kernel's global state, such as OpenCASCADE's unit settings, is never shared between
   calls or threads; this costs ~0.6 s a file, the interpreter starting and importing, against
   ~0.03 s for the same small file read in the caller's process, and ~1 s more for a model with
   curved faces, whose mid nodes need scipy's nearest-point search);
3. takes each CAD solid in file order as one :class:`~bladesolid.io.Body`: the boundary
   triangulated by the kernel's own mesher (BRepMesh, one absolute chord tolerance for every
   face so that shared edges get the same points and the shell closes), coordinates in metres,
   faces wound outward. These straight triangles are what the tetrahedral mass elements fill
   (element fields, spanwise cuts, views);
4. makes the same triangles curved (:attr:`CadModel.curved`): each edge gets a mid node on
   the CAD geometry (the closest point of the boundary curve it runs along, shared by the two
   faces that meet there, or of the face's surface), and integrates the solid's mass moments
   over these six-node triangles exactly (:func:`bladesolid.moments.curved_surface_moments`,
   :attr:`CadModel.moments`): the solid's figures. Straight triangles lie inside a convex
   surface and lose volume in proportion to the chord tolerance; curved ones converge about
   as its square;
5. returns the kernel's own figures per solid (:class:`KernelFigures`: volume, centre of
   gravity, inertia about the centre of gravity per unit density) for reporting beside
   bladesolid's, with :func:`kernel_differences` and :func:`kernel_verdict`.

Units: OpenCASCADE converts STEP and IGES coordinates to its working unit while reading, and
that unit is the millimetre unless told otherwise (``Geometry.OCCTargetUnit`` empty); the
child process always starts fresh, so the millimetre always holds and bladesolid scales by
1e-3. (Setting ``Geometry.OCCTargetUnit`` is not used: it is process-wide OpenCASCADE state,
and for an IGES file read first in a process it fails with "Could not set OpenCASCADE target
unit".) BREP coordinates are taken as they are, in ``units``.

Refused, each as one :class:`~bladesolid.errors.InputError` naming the file: a file the
kernel cannot read (garbage, truncated, empty), no solid (surfaces, curves or points only;
IGES surfaces are first sewn, see below), a solid whose shell does not close (an open shell),
solids that overlap (common volume above :data:`OVERLAP_REL` of the smaller; a solid exactly
inside another, such as an insert or balance slug modelled as a separate solid, is reported
as lying inside it: bladesolid needs the host solid with the cavity cut out and the insert as
its own solid), a ``units`` that disagrees with the file.

IGES usually carries trimmed surfaces rather than solids. When an IGES file holds no solid,
its surfaces are sewn (tolerance :data:`SEW_REL` of the bounding-box diagonal) and each shell
that closes becomes a solid, with a warning.

Accuracy, measured at the default tolerance :data:`DEFAULT_CAD_TOLERANCE` (2e-4 of the
diagonal; volume, CG as a fraction of the radius of gyration, inertia about the CG):

===========================  =========  ========================  ===================
solid                        triangles  curved triangles          straight (volume)
===========================  =========  ========================  ===================
sphere (Marks' handbook)     14 530     -1.2e-7, 4e-9, 2.0e-7     -1.0e-3
cylinder (Marks' handbook)   312        -8.3e-8, 0, 8.8e-8        -1.05e-3
cambered circular-arc loft   3 164      -9e-7, 6e-7, 1e-6         -2.7e-3
 (the tests' solid; kernel)
demo STEP blade (exact       20 344     -2.4e-6, 1.2e-6, 4.3e-6   -2.3e-3
 Gauss-Legendre integral)
NACA-type spline lofts,      6 000-     -1.0e-5 to -1.7e-5        -3.5e-3
 8 and 20 points a side      7 400       (against 3e-5 of diag.)
===========================  =========  ========================  ===================

Accuracy of the kernel's figures: they are not exact on B-spline faces. On planes, spheres,
cylinders and circular arcs they agree with handbook formulas to round-off, but the demo
blade's B-spline side (81 x 121 poles) comes out +0.519 % in volume (CG 1.4e-3, inertia
1.9e-3) against a Gauss-Legendre integral over each knot span of the same surface, which is
exact for a polynomial patch and which bladesolid's curved triangles meet within 3e-6 at every
tolerance from 3e-3 to 1e-4; the kernel's figure stays where it is when the solid is healed
(``healShapes``) and moves further off (+0.73 %, +0.94 %) when the solid is cut into 4 or 16
slabs. Spline lofts through 8, 20 and 40 points a side: the kernel 0.21 %, 0.09 % and 0.17 %
off the value the curved triangles converge to (and that straight triangles extrapolate to).
A difference between bladesolid's figures and the kernel's is therefore not by itself a fault
of the triangulation: :func:`kernel_verdict` weighs it against bladesolid's own error estimate.
"""

from __future__ import annotations

import json
import math
import os
import re
import stat
import subprocess
import sys
import tempfile
from dataclasses import dataclass, field

import numpy as np

from .errors import InputError, one_line
from .units import LENGTH_UNITS, length_scale

__all__ = ["CAD_FORMATS", "CAD_TOLERANCE_RANGE", "CURVED_ERROR_SHARE", "DEFAULT_CAD_TOLERANCE", "INTEGRATION",
           "KERNEL_WARN_REL", "CadModel", "FileUnit", "KernelComparison", "KernelFigures", "blade_section",
           "check_tolerance", "declared_unit", "declares_unit", "file_unit_of", "is_cad", "kernel_differences",
           "kernel_verdict", "kernel_warning", "read_cad"]

#: CAD formats by extension.
CAD_FORMATS = {".step": "STEP", ".stp": "STEP", ".iges": "IGES", ".igs": "IGES", ".brep": "BREP"}
#: Default chord tolerance (largest distance between a triangle and the CAD surface) as a
#: fraction of the bounding-box diagonal of the whole model. Measured (see the module
#: docstring): the curved-triangle figures within 1e-6 of the kernel's exact ones on the
#: cambered circular-arc loft of the tests (3 164 triangles) and within 2.4e-6 of the exact
#: integral on the demo blade (20 344 triangles; 3e-4 gives 14 500 triangles and 2.6e-6 there,
#: but 2.6e-5 to 8.8e-5 on spline lofts with small leading-edge radii, where 2e-4 gives 1e-5
#: to 1.7e-5). Straight triangles at this tolerance lose 0.2 % to 0.4 % of the volume; that is
#: what the mass elements fill.
DEFAULT_CAD_TOLERANCE = 2e-4
#: Accepted range of ``cad_tolerance``.
CAD_TOLERANCE_RANGE = (1e-7, 1e-2)
#: Two solids overlap when their common volume exceeds this fraction of the smaller one.
OVERLAP_REL = 1e-6
#: A difference between the kernel's figures and bladesolid's (the largest of the volume, CG
#: and inertia differences of :func:`kernel_differences`) above this fraction is a warning,
#: whichever side is likely off (:func:`kernel_verdict`).
KERNEL_WARN_REL = 1e-2
#: bladesolid's error estimate of the curved-triangle figures: this fraction of their
#: difference from the straight triangles' figures (measured: at most 1/70 of it on every
#: solid and tolerance tried, typically 1/1000; common practice to bound a higher-order
#: result by a fraction of the lower-order correction, no source).
CURVED_ERROR_SHARE = 0.02
#: Sewing tolerance for IGES surfaces, as a fraction of the bounding-box diagonal.
SEW_REL = 1e-6
#: A triangle is degenerate when its area is below this times the squared diagonal (as for
#: mesh files).
DEGENERATE_AREA_REL = 1e-12
#: Default cap on the size of a CAD file (bytes).
DEFAULT_MAX_BYTES = 2 * 1024**3
#: Most solids accepted in one file.
MAX_SOLIDS = 100
#: The message when the optional kernel is not installed.
MISSING_GMSH = "reading STEP needs the optional gmsh package: pip install 'bladesolid[cad]'"
#: How the solid's figures of CAD input are integrated (the ``cad.integration`` of the report).
INTEGRATION = ("divergence theorem over curved six-node triangles, mid-edge nodes on the CAD geometry, "
               "Dunavant degree-8 rule (exact for the quadratic patches)")
#: Millimetres: the unit OpenCASCADE converts STEP and IGES coordinates to.
_KERNEL_UNIT_M = 1e-3
#: Angular deflection of the kernel's mesher, rad: a second limit beside the chord tolerance
#: that keeps strongly curved small features (fillets, leading edges) from being cut across.
#: Measured: 0.35 and 0.25 change neither the triangle count nor the curved figures of the
#: spline lofts; on the demo blade 0.3 and 0.2 give 3 to 9 times the triangles and no better
#: figures, 0.8 fewer triangles and twice the error.
_ANGULAR_DEFLECTION = 0.5


@dataclass(frozen=True)
class FileUnit:
    """The length unit a CAD file declares.

    name    : a key of :data:`~bladesolid.units.LENGTH_UNITS` (``"mm"``, ``"in"``, ...) when the
              unit is one of them, else ``None``
    metres  : metres per file unit
    text    : the declaration as the file words it, e.g. ``"SI_UNIT(.MILLI.,.METRE.)"``
    """

    name: str | None
    metres: float
    text: str

    @property
    def label(self) -> str:
        """Short label: the unit key, else the text with its size in metres."""
        return self.name or f"{self.text} ({self.metres:.6g} m)"


@dataclass(frozen=True)
class KernelFigures:
    """OpenCASCADE's own figures of one solid, at unit density, in metres.

    volume_m3     : float, m³
    cg_m          : (3,) centroid, m, model frame
    inertia_cg_m5 : (3, 3) inertia tensor of the volume about the centroid, m⁵
                    (``∫ (|r|² 1 − r rᵀ) dV`` with r from the centroid: positive diagonal,
                    products of inertia with the minus sign, as
                    :func:`bladesolid.moments.inertia_from_second`); times the density it
                    is the inertia tensor in kg·m²
    """

    volume_m3: float
    cg_m: np.ndarray
    inertia_cg_m5: np.ndarray

    def moments(self, density: float = 1.0):
        """The same figures as :class:`~bladesolid.moments.Moments` about the frame origin
        (mass = density × volume, kg; first moment kg·m; second moment kg·m²).

        >>> k = KernelFigures(6.0, np.array([1.0, 0, 0]), np.diag([6.5, 5.0, 2.5]))
        >>> m = k.moments(2.0)
        >>> m.mass, m.cg.tolist(), m.inertia_cg().diagonal().tolist()
        (12.0, [1.0, 0.0, 0.0], [13.0, 10.0, 5.0])
        """
        from .moments import Moments

        inertia = np.asarray(self.inertia_cg_m5, dtype=float)
        s_cg = 0.5 * np.trace(inertia) * np.eye(3) - inertia  # I = tr(S) 1 − S
        c = np.asarray(self.cg_m, dtype=float)
        v = float(self.volume_m3)
        return Moments(density * v, density * v * c, density * (s_cg + v * np.outer(c, c)))


@dataclass(frozen=True)
class CadModel:
    """What :func:`read_cad` returns.

    bodies        : one :class:`~bladesolid.io.Body` per CAD solid, in file order, metres
    kernel        : the kernel's figures of each solid, in the same order
    unit          : the unit used for the coordinates (``units`` key, e.g. ``"mm"``), the
                    file's own for STEP and IGES, the given one for BREP
    file_unit     : the unit the file declares (None for BREP)
    cad_tolerance : chord tolerance used, relative to the bounding-box diagonal
    chord_m       : the same tolerance in metres
    curved        : per body ``(nodes (n, 3) m, tri6 (k, 6))``: the same triangles with their
                    mid-edge nodes on the CAD geometry (corners, then the mid nodes of edges
                    ab, bc, ca; outward), see :func:`bladesolid.moments.curved_surface_moments`
    moments       : per body :class:`~bladesolid.moments.Moments` of the curved triangles at
                    unit density (m³, m⁴, m⁵; model frame): the solid's mass moments
    curved_record : how the mid nodes were placed (edges on curves, in faces, left straight)
    straight_moments : per body, the same of the straight triangles (what the mass elements
                    fill)
    comparisons   : per body :class:`KernelComparison` of ``moments`` with the kernel's
    """

    path: str
    file_format: str
    unit: str
    file_unit: FileUnit | None
    bodies: tuple
    kernel: tuple[KernelFigures, ...]
    cad_tolerance: float
    chord_m: float
    warnings: tuple[str, ...] = field(default_factory=tuple)
    curved: tuple = ()
    moments: tuple = ()
    curved_record: dict = field(default_factory=dict)
    straight_moments: tuple = ()
    comparisons: tuple = ()

    def loaded_mesh(self):
        """The bodies as a :class:`~bladesolid.io.LoadedMesh` (what ``read_mesh`` returns),
        carrying this model as its ``cad``."""
        from .io import LoadedMesh

        return LoadedMesh(self.path, self.unit, self.bodies, self.warnings, self.file_format, cad=self)


# --------------------------------------------------------------------------- front door


def read_cad(path, units: str | None = None, *, cad_tolerance: float | None = None,
             max_bytes: int | None = None, timeout: float | None = None) -> CadModel:
    """Read the solids of a STEP, IGES or BREP file as closed triangle surfaces in metres.

    Parameters
    ----------
    path : str or os.PathLike
        ``.step``/``.stp``, ``.iges``/``.igs`` or ``.brep``.
    units : str, optional
        A key of :data:`~bladesolid.units.LENGTH_UNITS`. Required for BREP (which carries no
        unit); for STEP and IGES, when given, it must be the unit the file declares.
    cad_tolerance : float, optional
        Chord tolerance of the triangulation relative to the bounding-box diagonal of the
        model (default :data:`DEFAULT_CAD_TOLERANCE`).
    max_bytes : int, optional
        Refuse larger files (default :data:`DEFAULT_MAX_BYTES`).
    timeout : float, optional
        Seconds the kernel may take before the read is abandoned (default: no limit).

    Returns
    -------
    CadModel
        Bodies ``"body 1"``, ``"body 2"``... in the file's order of solids (``group`` holds the
        solid's name in the file, if any), faces wound outward; the kernel's figures per body.

    Raises
    ------
    InputError
        ``"<path>: <problem>"`` on one line (see the module docstring).
    """
    source = os.fsdecode(os.fspath(path))
    ext = os.path.splitext(source)[1].lower()
    if ext not in CAD_FORMATS:
        raise InputError(
            source, f"unknown CAD format {ext or '(no extension)'!r}; expected "
            f"{', '.join(CAD_FORMATS)}")
    fmt = CAD_FORMATS[ext]
    tol = DEFAULT_CAD_TOLERANCE if cad_tolerance is None else _check_tolerance(cad_tolerance)
    if units is not None:
        length_scale(units, "units")  # unknown unit -> InputError naming the parameter
    limit = DEFAULT_MAX_BYTES if max_bytes is None else int(max_bytes)
    _check_file(source, limit)

    file_unit = declared_unit(source)  # also refuses files that are not STEP/IGES text
    if fmt == "BREP":
        if units is None:
            raise InputError(source, "a BREP file carries no length unit; give units")
        unit, scale = units, LENGTH_UNITS[units]
    else:
        if file_unit is None:
            raise InputError(source, f"declares no length unit that can be read; re-export the "
                                     f"{fmt} file with its length unit")
        if units is not None and not math.isclose(LENGTH_UNITS[units], file_unit.metres,
                                                  rel_tol=1e-9):
            raise InputError(
                source, f"units {units!r} disagrees with the file's own length unit "
                        f"{file_unit.label}; leave units out or give {file_unit.name!r}"
                if file_unit.name else
                f"units {units!r} disagrees with the file's own length unit {file_unit.label}; "
                "leave units out")
        unit = file_unit.name or units or "m"
        scale = _KERNEL_UNIT_M

    raw = _run_kernel(source, fmt, tol, timeout)
    return _assemble(source, fmt, raw, unit, file_unit, scale, tol)


def is_cad(path) -> bool:
    """True when ``path`` has a CAD extension (:data:`CAD_FORMATS`).

    >>> is_cad("blade.STEP"), is_cad("blade.stl")
    (True, False)
    """
    return os.path.splitext(os.fsdecode(os.fspath(path)))[1].lower() in CAD_FORMATS


def declares_unit(path) -> bool:
    """True for the CAD formats that carry their own length unit (STEP and IGES, not BREP).

    >>> declares_unit("blade.igs"), declares_unit("blade.brep"), declares_unit("blade.stl")
    (True, False, False)
    """
    return CAD_FORMATS.get(os.path.splitext(os.fsdecode(os.fspath(path)))[1].lower()) in ("STEP", "IGES")


def file_unit_of(path, max_bytes: int | None = None) -> FileUnit:
    """The length unit a STEP or IGES file declares, the file checked first (missing, empty,
    too large, not the format: :class:`~bladesolid.errors.InputError`); refused when it
    declares none that can be read."""
    source = os.fsdecode(os.fspath(path))
    _check_file(source, DEFAULT_MAX_BYTES if max_bytes is None else int(max_bytes))
    unit = declared_unit(source)
    if unit is None:
        fmt = CAD_FORMATS.get(os.path.splitext(source)[1].lower(), "CAD")
        raise InputError(source, f"declares no length unit that can be read; re-export the {fmt} file with "
                                 "its length unit")
    return unit


def check_tolerance(value, source: str = "cad_tolerance") -> float:
    """``cad_tolerance`` as a float within :data:`CAD_TOLERANCE_RANGE`; an
    :class:`~bladesolid.errors.InputError` naming ``source`` otherwise."""
    try:
        tol = float(value)
    except (TypeError, ValueError):
        raise InputError(source, f"must be a number, got {value!r}") from None
    lo, hi = CAD_TOLERANCE_RANGE
    if isinstance(value, bool) or not (math.isfinite(tol) and lo <= tol <= hi):
        raise InputError(source, f"must lie between {lo:g} and {hi:g} (a fraction of the model's "
                                 f"bounding-box diagonal), got {value!r}")
    return tol


def _check_tolerance(value) -> float:
    return check_tolerance(value)


def _check_file(source: str, limit: int) -> int:
    """Existence, kind, readability and size; returns the size in bytes."""
    try:
        st = os.stat(source)
    except FileNotFoundError:
        raise InputError(source, "file not found") from None
    except OSError as exc:
        raise InputError(source, f"cannot be read: {exc.strerror or exc}") from None
    if stat.S_ISDIR(st.st_mode):
        raise InputError(source, "is a directory, not a CAD file")
    if not stat.S_ISREG(st.st_mode):
        raise InputError(source, "is not a regular file; give a CAD file")
    if st.st_size == 0:
        raise InputError(source, "file is empty (0 bytes); expected a CAD model")
    if st.st_size > limit:
        raise InputError(source, f"file is {st.st_size:,} bytes, over the {limit:,}-byte limit")
    try:
        with open(source, "rb") as fh:
            fh.read(1)
    except OSError as exc:
        raise InputError(source, f"cannot be read: {(exc.strerror or str(exc)).lower()}") from None
    return int(st.st_size)


# --------------------------------------------------------------------------- file units

#: SI prefixes of STEP (ISO 10303-41 si_prefix), as powers of ten.
_SI_PREFIX = {"EXA": 18, "PETA": 15, "TERA": 12, "GIGA": 9, "MEGA": 6, "KILO": 3, "HECTO": 2,
              "DECA": 1, "DECI": -1, "CENTI": -2, "MILLI": -3, "MICRO": -6, "NANO": -9,
              "PICO": -12, "FEMTO": -15, "ATTO": -18}
#: IGES global parameter 14 (units flag), metres per unit (IGES 5.3, section 2.2.4.3; from memory).
_IGES_FLAG = {1: 0.0254, 2: 1e-3, 4: 0.3048, 5: 1609.344, 6: 1.0, 7: 1e3, 8: 2.54e-5,
              9: 1e-6, 10: 1e-2, 11: 2.54e-8}
#: IGES global parameter 15 (units name), metres per unit (same source).
_IGES_NAME = {"IN": 0.0254, "INCH": 0.0254, "MM": 1e-3, "FT": 0.3048, "MI": 1609.344,
              "M": 1.0, "KM": 1e3, "MIL": 2.54e-5, "UM": 1e-6, "CM": 1e-2, "UIN": 2.54e-8}

_STEP_REF = re.compile(r"#(\d+)")


def declared_unit(path) -> FileUnit | None:
    """The length unit a STEP or IGES file declares; None for BREP or when none is found.

    Also refuses (InputError) a ``.step``/``.stp`` that is not ISO 10303-21 text or lacks its
    end line (truncated), an ``.iges``/``.igs`` without a start section or terminate line, and
    a ``.brep`` without OpenCASCADE's header.

    >>> import tempfile, os
    >>> p = os.path.join(tempfile.mkdtemp(), "u.step")
    >>> _ = open(p, "w").write("ISO-10303-21;\\nDATA;\\n#1=GLOBAL_UNIT_ASSIGNED_CONTEXT((#2));\\n"
    ...     "#2=(LENGTH_UNIT() NAMED_UNIT(*) SI_UNIT(.MILLI.,.METRE.));\\nENDSEC;\\n"
    ...     "END-ISO-10303-21;\\n")
    >>> declared_unit(p)
    FileUnit(name='mm', metres=0.001, text='SI_UNIT(.MILLI.,.METRE.)')
    """
    source = os.fsdecode(os.fspath(path))
    fmt = CAD_FORMATS.get(os.path.splitext(source)[1].lower())
    if fmt == "STEP":
        return _step_unit(source)
    if fmt == "IGES":
        return _iges_unit(source)
    if fmt == "BREP":
        with open(source, "rb") as fh:
            head = fh.read(256)
        if b"CASCADE Topology" not in head:
            raise InputError(source, "is not a BREP file: it does not begin with OpenCASCADE's "
                                     "'CASCADE Topology' header")
    return None


def _named_unit(metres: float, text: str) -> FileUnit:
    name = next((k for k, v in LENGTH_UNITS.items() if math.isclose(v, metres, rel_tol=1e-9)),
                None)
    return FileUnit(name, float(metres), text)


def _step_unit(source: str) -> FileUnit | None:
    with open(source, "rb") as fh:
        data = fh.read().decode("latin-1")
    head = data.lstrip()[:64].upper()
    if not head.startswith("ISO-10303-21"):
        raise InputError(source, "is not a STEP file: it does not begin with 'ISO-10303-21;'")
    if "END-ISO-10303-21" not in data[-4096:].upper():
        raise InputError(source, "STEP file is truncated: it does not end with "
                                 "'END-ISO-10303-21;'")
    section = re.search(r"\bDATA\s*;", data, re.I)
    if section is None:
        raise InputError(source, "STEP file has no DATA section")
    text = data[section.start():]
    if "/*" in text:
        text = re.sub(r"/\*.*?\*/", " ", text, flags=re.S)
    records = _StepRecords(text)
    used: list[int] = []
    for m in re.finditer(r"GLOBAL_UNIT_ASSIGNED_CONTEXT\s*\(\s*\(([^)]*)\)", text, re.I):
        used += [int(r) for r in _STEP_REF.findall(m.group(1))]
    found = {}
    for rid in dict.fromkeys(used):
        unit = _step_length(records, rid, 0)
        if unit is not None:
            found[(round(unit[0], 15), unit[1])] = unit
    if not found:
        return None
    if len({k[0] for k in found}) > 1:
        labels = ", ".join(sorted(u[1] for u in found.values()))
        raise InputError(source, f"declares several length units ({labels}); bladesolid needs "
                                 "one length unit per file")
    metres, label = next(iter(found.values()))
    return _named_unit(metres, label)


class _StepRecords:
    """The records of a STEP DATA section looked up by id on demand (a file may be large and
    only the few unit records are wanted)."""

    def __init__(self, text: str):
        self.text = text

    def get(self, rid: int, default=None):
        m = re.search(rf"#{rid}\s*=\s*((?:'(?:[^']|'')*'|[^;'])*);", self.text)
        return m.group(1) if m else default


def _step_length(records, rid: int, depth: int):
    """(metres, label) of a STEP length unit record, or None when it is no length unit."""
    body = records.get(rid)
    if body is None or depth > 8:
        return None
    up = re.sub(r"\s+", "", body.upper())
    if "LENGTH_UNIT(" not in up:
        return None
    si = re.search(r"SI_UNIT\(([^,]*),\.METRE\.\)", up)
    if si:
        prefix = si.group(1).strip(".")
        if prefix in ("$", ""):
            return 1.0, "SI_UNIT($,.METRE.)"
        if prefix in _SI_PREFIX:
            return 10.0 ** _SI_PREFIX[prefix], f"SI_UNIT(.{prefix}.,.METRE.)"
        return None
    conv = re.search(r"CONVERSION_BASED_UNIT\('((?:[^']|'')*)',#(\d+)\)", up)
    if conv:
        measure = records.get(int(conv.group(2)), "")
        m = re.search(r"LENGTH_MEASURE\(\s*([-+0-9.EeDd]+)\s*\)", measure.upper())
        ref = _STEP_REF.findall(measure.split("LENGTH_MEASURE", 1)[-1]) if m else []
        if m and ref:
            base = _step_length(records, int(ref[-1]), depth + 1)
            if base is not None:
                factor = float(m.group(1).replace("D", "E"))
                return factor * base[0], f"{conv.group(1)} ({factor:g} × {base[1]})"
    return None


def _iges_unit(source: str) -> FileUnit | None:
    with open(source, "rb") as fh:
        lines = fh.read().decode("latin-1").splitlines()
    lines = [ln for ln in lines if ln.strip()]
    if not lines or not any(len(ln) >= 73 and ln[72] == "S" for ln in lines[:50]):
        raise InputError(source, "is not an IGES file: no start section (lines marked 'S' in "
                                 "column 73)")
    if len(lines[-1]) < 73 or lines[-1][72] != "T":
        raise InputError(source, "IGES file is truncated: its last line is not the terminate "
                                 "line (marked 'T' in column 73)")
    glob = "".join(ln[:72] for ln in lines if len(ln) >= 73 and ln[72] == "G")
    params = _iges_global(glob)
    if len(params) < 15:
        return None
    try:
        flag = int(float(params[13])) if params[13] else 1
    except ValueError:
        return None
    name = params[14].strip().upper()
    if flag == 3:
        metres = _IGES_NAME.get(name)
        if metres is None:
            return None
        return _named_unit(metres, f"units flag 3, {name}")
    metres = _IGES_FLAG.get(flag)
    if metres is None:
        return None
    return _named_unit(metres, f"units flag {flag}" + (f", {name}" if name else ""))


def _iges_global(text: str) -> list[str]:
    """Parameters of an IGES global section (Hollerith strings decoded).

    >>> _iges_global("1H,,1H;,4HA,B;,2HMM,2;")[:5]
    [',', ';', 'A,B;', 'MM', '2']
    """
    pdel, rdel = ",", ";"
    if text.startswith("1H") and len(text) > 2:
        pdel = text[2]
    out: list[str] = []
    i, n = 0, len(text)
    while i < n:
        m = re.match(r"\s*(\d+)H", text[i:])
        if m:
            k = int(m.group(1))
            j = i + m.end()
            out.append(text[j:j + k])
            i = j + k
        else:
            j = i
            while j < n and text[j] not in (pdel, rdel):
                j += 1
            out.append(text[i:j].strip())
            i = j
        if len(out) == 2 and out[0] == pdel and len(out[1]) == 1:
            rdel = out[1]
        if i >= n or text[i] == rdel:
            break
        i += 1  # the parameter delimiter
    return out


# --------------------------------------------------------------------------- the kernel, in a child


def _run_kernel(source: str, fmt: str, tol: float, timeout: float | None) -> dict:
    """Run :func:`_kernel_read` in a fresh Python process; returns its result dict."""
    try:
        import importlib.util

        if importlib.util.find_spec("gmsh") is None:
            raise ImportError
    except (ImportError, ValueError):
        raise InputError(source, MISSING_GMSH) from None
    with tempfile.TemporaryDirectory(prefix="bladesolid-cad-") as work:
        request = os.path.join(work, "request.json")
        with open(request, "w", encoding="utf-8") as fh:
            json.dump({"path": os.path.abspath(source), "format": fmt, "tolerance": tol,
                       "angular": _ANGULAR_DEFLECTION,
                       "sew_rel": SEW_REL, "overlap_rel": OVERLAP_REL,
                       "max_solids": MAX_SOLIDS, "out": work}, fh)
        env = dict(os.environ)
        root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
        env["PYTHONPATH"] = root + (os.pathsep + env["PYTHONPATH"] if env.get("PYTHONPATH") else "")
        env.setdefault("OMP_NUM_THREADS", "1")
        try:
            proc = subprocess.run(
                [sys.executable, "-m", "bladesolid.cad", request], cwd=work, env=env,
                stdin=subprocess.DEVNULL, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                timeout=timeout)
        except subprocess.TimeoutExpired:
            raise InputError(source, f"the CAD kernel did not finish reading within {timeout:g} s") from None
        result = os.path.join(work, "result.json")
        if not os.path.exists(result):
            if proc.returncode < 0:
                why = f"stopped by signal {-proc.returncode}"
            else:
                why = f"exited with status {proc.returncode}"
            tail = _last_line(proc.stderr)
            raise InputError(source, f"cannot be read as {fmt}: the CAD kernel {why}"
                                     + (f" ({tail})" if tail else ""))
        with open(result, encoding="utf-8") as fh:
            meta = json.load(fh)
        if "error" in meta:
            raise InputError(source, meta["error"])
        with np.load(os.path.join(work, "mesh.npz")) as arrays:
            meta["nodes"] = arrays["nodes"]
            meta["triangles"] = [arrays[f"tri{i}"] for i in range(len(meta["solids"]))]
            meta["triangles6"] = [arrays[f"tri6_{i}"] for i in range(len(meta["solids"]))]
        return meta


def _last_line(blob: bytes) -> str:
    lines = [ln.strip() for ln in blob.decode("utf-8", "replace").splitlines() if ln.strip()]
    return one_line(lines[-1], 200) if lines else ""


def _kernel_read(request: dict) -> dict:
    """The work done in the child: read, sew (IGES), measure, triangulate, check overlaps.

    Returns the result dict (``error`` on refusal); arrays are written to ``mesh.npz``.
    Lengths here are the kernel's (millimetres for STEP/IGES, the file's own for BREP).
    """
    import gmsh

    fmt = request["format"]
    gmsh.initialize(interruptible=False, readConfigFiles=False)
    try:
        gmsh.option.setNumber("General.Terminal", 0)
        gmsh.option.setNumber("General.Verbosity", 0)
        gmsh.option.setNumber("General.NumThreads", 1)
        gmsh.model.add("cad")
        occ = gmsh.model.occ
        try:
            occ.importShapes(request["path"], highestDimOnly=False)
            occ.synchronize()
        except Exception as exc:  # noqa: BLE001 - every kernel failure is a read failure
            return {"error": f"cannot be read as {fmt}: {_kernel_reason(exc)}"}
        warnings = []
        counts = [len(gmsh.model.getEntities(d)) for d in range(4)]
        if counts[3] == 0 and fmt == "IGES" and counts[2]:
            box = gmsh.model.getBoundingBox(-1, -1)
            diag = math.dist(box[:3], box[3:])
            occ.healShapes([], tolerance=request["sew_rel"] * diag, fixDegenerated=False,
                           fixSmallEdges=False, fixSmallFaces=False, sewFaces=True,
                           makeSolids=True)
            occ.synchronize()
            solids = len(gmsh.model.getEntities(3))
            if solids:
                warnings.append(f"the IGES file holds {counts[2]} surfaces and no solid; they "
                                f"were sewn into {solids} closed solid(s)")
        volumes = [t for _, t in gmsh.model.getEntities(3)]
        if not any(counts):
            return {"error": f"cannot be read as {fmt}: the kernel found no shapes in it"}
        if not volumes:
            what = ", ".join(f"{n} {w if n > 1 else w[:-1]}" for n, w in
                             zip(counts[::-1][1:], ("surfaces", "curves", "points")) if n)
            if fmt == "IGES" and counts[2]:
                why = " (they do not close into a solid)"
            elif counts[2]:
                why = " (an open shell, or surfaces never made into a solid)"
            else:
                why = ""
            return {"error": f"contains no solid, only {what}{why}; export the blade as a "
                             "closed solid body"}
        if len(volumes) > request["max_solids"]:
            return {"error": f"has {len(volumes)} solids, more than the {request['max_solids']} "
                             "accepted"}
        if any(gmsh.model.getType(2, t) not in _FLAT for _, t in gmsh.model.getEntities(2)):
            # the mid nodes on curved faces need scipy.spatial (~1 s to import): it is imported
            # beside the kernel's meshing, which releases the interpreter
            import importlib
            import threading

            threading.Thread(target=importlib.import_module, args=("scipy.spatial",), daemon=True).start()
        box = gmsh.model.getBoundingBox(-1, -1)
        diag = math.dist(box[:3], box[3:])
        solids = []
        for tag in volumes:
            solids.append({
                "tag": tag,
                "name": gmsh.model.getEntityName(3, tag),
                "volume": occ.getMass(3, tag),
                "cg": list(occ.getCenterOfMass(3, tag)),
                "inertia": list(occ.getMatrixOfInertia(3, tag)),
                "box": list(occ.getBoundingBox(3, tag)),
            })
        chord = request["tolerance"] * diag
        gmsh.option.setNumber("Mesh.StlLinearDeflection", chord)
        gmsh.option.setNumber("Mesh.StlLinearDeflectionRelative", 0)
        gmsh.option.setNumber("Mesh.StlAngularDeflection", request["angular"])
        gmsh.model.mesh.importStl()
        arrays, curved = _kernel_curved_mesh(gmsh, [s["tag"] for s in solids])
        overlaps = _kernel_overlaps(gmsh, solids, request["overlap_rel"])
        np.savez(os.path.join(request["out"], "mesh.npz"), **arrays)
        return {"solids": solids, "diag": diag, "chord": chord, "warnings": warnings,
                "overlaps": overlaps, "counts": counts, "curved": curved}
    finally:
        gmsh.finalize()


#: A mid-edge node is placed on the CAD geometry only when that moves it from the straight
#: edge's midpoint by at most this fraction of the edge's length (a circular arc of 120° bulges
#: by 0.29 of its chord; the angular deflection keeps edges far below that). Farther means the
#: kernel's projection found another part of the surface: the edge then stays straight.
_MID_MOVE_REL = 0.3


def _kernel_curved_mesh(gmsh, volumes: list) -> tuple[dict, dict]:
    """The kernel's triangulation of each solid as six-node triangles whose mid-edge nodes lie
    on the CAD geometry (runs in the child, after ``importStl``).

    The kernel meshes each face on its own (the nodes of a shared edge are repeated per face,
    bit-identical); they are merged first. The mesher also writes each boundary curve's
    polygon as line elements: an edge that is a segment of such a polygon gets its midpoint
    projected onto that curve, once, so both faces along it share the node (the curved surface
    stays watertight); any other edge is inside one face and gets its midpoint projected onto
    that face's surface. Returns the arrays for ``mesh.npz`` (``nodes``: corners then mid
    nodes; ``tri{i}``: corners per solid, ``tri6_{i}``: corners and the mid nodes of edges
    ab, bc, ca, into ``nodes``) and a record (edges on curves and faces, mid nodes left on the
    straight edge, largest move as a fraction of the edge length).
    """
    from .io import merge_coincident

    tags, coords, _ = gmsh.model.mesh.getNodes()
    tags = tags.astype(np.int64)
    index = np.zeros(int(tags.max()) + 1 if len(tags) else 1, dtype=np.int64)
    index[tags] = np.arange(len(tags))
    nodes, rep = merge_coincident(coords.reshape(-1, 3), np.arange(len(tags)))
    n = np.int64(len(nodes))

    def ids(node_tags):
        return rep[index[np.asarray(node_tags, dtype=np.int64)]]

    # boundary-curve polygons: segment key -> curve
    seg_keys, seg_curves = [np.zeros(0, np.int64)], [np.zeros(0, np.int64)]
    for _, curve in gmsh.model.getEntities(1):
        types, _, elem_nodes = gmsh.model.mesh.getElements(1, curve)
        for t, nn in zip(types, elem_nodes):
            if t == 1:  # 2-node lines
                p = ids(nn).reshape(-1, 2)
                seg_keys.append(np.minimum(p[:, 0], p[:, 1]) * n + np.maximum(p[:, 0], p[:, 1]))
                seg_curves.append(np.full(len(p), curve, dtype=np.int64))
    seg_keys, seg_curves = np.concatenate(seg_keys), np.concatenate(seg_curves)
    order = np.argsort(seg_keys, kind="stable")
    seg_keys, seg_curves = seg_keys[order], seg_curves[order]

    # triangles of every face (a face shared by two solids is meshed once)
    face_tris: dict[int, np.ndarray] = {}
    solid_faces = []
    for tag in volumes:
        faces = [abs(f) for _, f in gmsh.model.getBoundary([(3, tag)], combined=False, oriented=False)]
        solid_faces.append(faces)
        for face in faces:
            if face in face_tris:
                continue
            types, _, elem_nodes = gmsh.model.mesh.getElements(2, face)
            tris = [ids(nn).reshape(-1, 3) for t, nn in zip(types, elem_nodes) if t == 2]  # 3-node
            face_tris[face] = np.vstack(tris) if tris else np.zeros((0, 3), np.int64)
    all_faces = list(face_tris)
    tri = np.vstack([face_tris[f] for f in all_faces]) if all_faces else np.zeros((0, 3), np.int64)
    tri_face = np.concatenate([np.full(len(face_tris[f]), f, np.int64) for f in all_faces]) \
        if all_faces else np.zeros(0, np.int64)

    # the unique edges, each with the face of its first triangle and its curve (or -1)
    a = tri[:, [0, 1, 2]].T.ravel()
    b = tri[:, [1, 2, 0]].T.ravel()
    keys = np.minimum(a, b) * n + np.maximum(a, b)
    ukeys, first, inverse = np.unique(keys, return_index=True, return_inverse=True)
    edge_face = np.tile(tri_face, 3)[first]
    lo, hi = ukeys // n, ukeys % n
    pos = np.searchsorted(seg_keys, ukeys)
    pos_ok = np.minimum(pos, max(len(seg_keys) - 1, 0))
    on_curve = (pos < len(seg_keys)) & (seg_keys[pos_ok] == ukeys) if len(seg_keys) else \
        np.zeros(len(ukeys), bool)
    edge_curve = np.where(on_curve, seg_curves[pos_ok] if len(seg_keys) else -1, -1)
    chord_mid = 0.5 * (nodes[lo] + nodes[hi])
    length = np.linalg.norm(nodes[hi] - nodes[lo], axis=1)
    mids = chord_mid.copy()
    moved = np.zeros(len(ukeys))
    straight = 0

    def project(dim, tag, sel):
        nonlocal straight
        sel = np.flatnonzero(sel & (length > 0))
        if not len(sel):
            return
        got, ok = _closest_points(gmsh, dim, int(tag), chord_mid[sel])
        move = np.linalg.norm(got - chord_mid[sel], axis=1)
        ok &= np.isfinite(move) & (move <= _MID_MOVE_REL * length[sel])
        if (~ok).any():  # the kernel's own (slow, global) projection for the few left
            redo = np.flatnonzero(~ok)
            try:
                again, _ = gmsh.model.getClosestPoint(dim, int(tag), chord_mid[sel[redo]].ravel().tolist())
                got[redo] = np.asarray(again, dtype=float).reshape(-1, 3)
            except Exception:  # noqa: BLE001 - no projection: those edges stay straight
                pass
            move = np.linalg.norm(got - chord_mid[sel], axis=1)
            ok = np.isfinite(move) & (move <= _MID_MOVE_REL * length[sel])
        mids[sel[ok]] = got[ok]
        moved[sel[ok]] = move[ok] / length[sel[ok]]
        straight += int((~ok).sum())

    for curve in np.unique(edge_curve[edge_curve >= 0]):
        project(1, curve, edge_curve == curve)
    inside = edge_curve < 0
    for face in np.unique(edge_face[inside]):
        project(2, face, inside & (edge_face == face))

    mid_of = inverse.reshape(3, -1).T + n  # (triangles, 3): mids of ab, bc, ca
    tri6 = np.hstack([tri, mid_of])
    arrays = {"nodes": np.vstack([nodes, mids])}
    row_of_face, start = {}, 0
    for f in all_faces:
        row_of_face[f] = (start, start + len(face_tris[f]))
        start += len(face_tris[f])
    for i, faces in enumerate(solid_faces):
        rows = [np.arange(*row_of_face[f]) for f in faces]
        rows = np.concatenate(rows) if rows else np.zeros(0, np.int64)
        arrays[f"tri{i}"] = tri[rows]
        arrays[f"tri6_{i}"] = tri6[rows]
    record = {"edges_on_curves": int(on_curve.sum()), "edges_in_faces": int((~on_curve).sum()),
              "straight_edges": straight, "largest_move_rel": float(moved.max()) if len(moved) else 0.0}
    return arrays, record


def _closest_points(gmsh, dim: int, tag: int, points: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Closest points of a curve (``dim`` 1) or a face's surface (``dim`` 2) to ``points``
    (m, 3) near it: Gauss-Newton on the parameters from the nearest point of a parametric grid.

    The kernel's own ``getClosestPoint`` searches the whole surface for every point (~20 ms a
    point on the demo blade's 81 x 121-pole surface); here the surface is evaluated on a grid
    once (a few microseconds a point), each point starts from its nearest grid point and a few
    Gauss-Newton steps (``J Jᵀ Δ = −J (S − p)``, J the parametric derivatives) finish. A
    parameter that is periodic (the surface meets itself across the parameter range, as a
    cylinder's) wraps; others stay within their bounds. Returns the points and a mask of
    those whose step converged (the caller falls back to the kernel for the others). Planes
    and lines, linear in their parameters, need no search: one step from anywhere is exact.
    """
    m = len(points)
    lo, hi = (np.asarray(b, dtype=float) for b in gmsh.model.getParametrizationBounds(dim, tag))

    def value(par):
        return np.asarray(gmsh.model.getValue(dim, tag, par.ravel().tolist()), dtype=float).reshape(-1, 3)

    if gmsh.model.getType(dim, tag) in _FLAT:
        par = np.tile(0.5 * (lo + hi), (m, 1))
        size = float(np.ptp(value(np.vstack([lo, hi])), axis=0).max()) or 1.0
        return _gauss_newton(gmsh, dim, tag, points, par, lo, hi, np.zeros(dim, bool), size, value)
    from scipy.spatial import cKDTree

    count = int(min(max(4 * m, 4096), 131072))
    side = max(int(round(count ** (1.0 / dim))), 16)
    axes = [np.linspace(lo[k], hi[k], side) for k in range(dim)]
    grid = np.stack([g.ravel() for g in np.meshgrid(*axes, indexing="ij")], axis=1)

    samples = value(grid)
    size = float(np.ptp(samples, axis=0).max()) or 1.0
    periodic = np.zeros(dim, dtype=bool)
    for k in range(dim):  # the same points at both ends of parameter k, on a few lines
        a = grid[:: max(len(grid) // 7, 1)].copy()
        b = a.copy()
        a[:, k], b[:, k] = lo[k], hi[k]
        periodic[k] = hi[k] > lo[k] and np.linalg.norm(value(a) - value(b), axis=1).max() <= 1e-9 * size
    par = grid[cKDTree(samples).query(points)[1]].copy()
    return _gauss_newton(gmsh, dim, tag, points, par, lo, hi, periodic, size, value)


#: Entity types that are linear in their parameters (no search for closest points).
_FLAT = ("Plane", "Line")


def _gauss_newton(gmsh, dim, tag, points, par, lo, hi, periodic, size, value):
    """Gauss-Newton steps of :func:`_closest_points` from the parameters ``par``."""
    m = len(points)
    span = np.where(hi > lo, hi - lo, 1.0)
    step = np.full(m, np.inf)
    active = np.arange(m)
    for _ in range(40):
        p = par[active]
        r = value(p) - points[active]
        J = np.asarray(gmsh.model.getDerivative(dim, tag, p.ravel().tolist()),
                       dtype=float).reshape(len(active), dim, 3)
        A = np.einsum("mki,mli->mkl", J, J)
        A += (1e-12 * np.trace(A, axis1=1, axis2=2) + 1e-300)[:, None, None] * np.eye(dim)
        delta = np.linalg.solve(A, -np.einsum("mki,mi->mk", J, r)[..., None])[..., 0]
        delta = np.clip(delta, -0.25 * span, 0.25 * span)  # no leaps across the surface
        p = p + delta
        p = np.where(periodic, lo + np.mod(p - lo, span), np.clip(p, lo, hi))
        par[active] = p
        step[active] = np.linalg.norm(np.einsum("mki,mk->mi", J, delta), axis=1)
        active = active[step[active] > 1e-12 * size]
        if not len(active):
            break
    return value(par), step <= 1e-9 * size


def _kernel_overlaps(gmsh, solids: list, overlap_rel: float) -> list:
    """Pairs of solids whose boxes overlap and whose common volume (a kernel boolean) exceeds
    ``overlap_rel`` of the smaller: ``[[i, j, common volume], ...]``."""
    occ = gmsh.model.occ
    out = []
    for i in range(len(solids)):
        for j in range(i + 1, len(solids)):
            a, b = np.array(solids[i]["box"]), np.array(solids[j]["box"])
            span = max(float(np.max(a[3:] - a[:3])), float(np.max(b[3:] - b[:3])))
            if np.any(np.minimum(a[3:], b[3:]) - np.maximum(a[:3], b[:3]) <= 1e-9 * span):
                continue
            try:
                common, _ = occ.intersect([(3, solids[i]["tag"])], [(3, solids[j]["tag"])],
                                          removeObject=False, removeTool=False)
                occ.synchronize()
                vol = sum(occ.getMass(3, t) for d, t in common if d == 3)
                if common:
                    occ.remove(common, recursive=True)
                    occ.synchronize()
            except Exception:  # noqa: BLE001 - a failed boolean is reported as unknown
                out.append([i, j, None])
                continue
            small = min(abs(solids[i]["volume"]), abs(solids[j]["volume"]))
            if vol > overlap_rel * small:
                out.append([i, j, vol])
    return out


def _kernel_reason(exc: BaseException) -> str:
    text = str(exc).strip() or type(exc).__name__
    text = text.splitlines()[0]
    if "Could not read file" in text or "Unknown" in text:
        return "the kernel found no readable model in it (" + text + ")"
    return text


def _worker_main(request_path: str) -> int:
    """Entry point of the child process (``python -m bladesolid.cad REQUEST``)."""
    devnull = os.open(os.devnull, os.O_WRONLY)
    os.dup2(devnull, 1)  # the kernel writes to the C stdout regardless of General.Terminal
    with open(request_path, encoding="utf-8") as fh:
        request = json.load(fh)
    try:
        result = _kernel_read(request)
    except Exception as exc:  # noqa: BLE001 - reported to the parent as a read failure
        result = {"error": f"cannot be read as {request['format']}: {_kernel_reason(exc)}"}
    tmp = os.path.join(request["out"], "result.json.tmp")
    with open(tmp, "w", encoding="utf-8") as fh:
        json.dump(result, fh)
    os.replace(tmp, os.path.join(request["out"], "result.json"))
    return 0


# --------------------------------------------------------------------------- assembling


def _assemble(source, fmt, raw, unit, file_unit, scale, tol) -> CadModel:
    """Bodies and kernel figures in metres from the child's result; closure and overlaps."""
    from .io import Body, merge_coincident

    nodes = np.asarray(raw["nodes"], dtype=np.float64)
    solids = raw["solids"]
    names = [f"body {i + 1}" for i in range(len(solids))]
    for i, j, vol in raw["overlaps"]:
        a, b = names[i], names[j]
        if vol is None:
            raise InputError(source, f"{a} and {b} could not be checked for overlap (the "
                                     "kernel's boolean failed)")
        small = min(abs(solids[i]["volume"]), abs(solids[j]["volume"]))
        inner, outer = (a, b) if abs(solids[i]["volume"]) <= abs(solids[j]["volume"]) else (b, a)
        if vol >= (1 - 1e-6) * small:
            raise InputError(
                source, f"{inner} lies inside {outer} (common volume {vol * scale**3:.4g} m^3); "
                "an insert or balance slug must be its own solid with the cavity cut out of "
                "the host, sharing no volume")
        raise InputError(
            source, f"{a} and {b} overlap: they share {vol * scale**3:.4g} m^3 "
                    f"({100 * vol / small:.3g} % of the smaller); solids in one file may touch "
                    "but not interpenetrate")
    from .moments import curved_surface_moments, surface_volume_moments

    bodies, kernel, curved, exact, warnings = [], [], [], [], list(raw["warnings"])
    straight, comparisons = [], []
    for i, s in enumerate(solids):
        tri = np.asarray(raw["triangles"][i], dtype=np.int64)
        tri6 = np.asarray(raw["triangles6"][i], dtype=np.int64)
        where = _where_box(s["box"], scale)
        if s["volume"] <= 0 or not len(tri):
            raise InputError(source, f"{names[i]} {where} has no volume (the kernel gives "
                                     f"{s['volume']:.4g}); its shell is open or inside out")
        # the child merged the faces' repeated nodes; a triangle collapsed by the merge (at a
        # degenerate edge, such as a sphere's pole) encloses nothing and is dropped
        keep = (tri[:, 0] != tri[:, 1]) & (tri[:, 1] != tri[:, 2]) & (tri[:, 0] != tri[:, 2])
        tri, tri6 = tri[keep], tri6[keep]
        used, local = np.unique(tri, return_inverse=True)
        v, f = nodes[used], local.reshape(-1, 3)
        problem = _closure_problem(f) or _degenerate_problem(v, f)
        if problem:
            raise InputError(source, f"{names[i]} {where} is not a closed solid: {problem}; "
                                     "the CAD solid's shell is open (missing or unjoined faces)"
                             if "zero area" not in problem else
                             f"{names[i]} {where}: the triangulation has {problem}")
        vol = _signed_volume(v, f)
        if vol < 0:
            f = f[:, ::-1].copy()
            tri6 = tri6[:, [2, 1, 0, 4, 3, 5]]  # corners c, b, a; mid nodes of cb, ba, ac
            vol = -vol
        used6, local6 = np.unique(tri6, return_inverse=True)
        v6, f6 = nodes[used6] * scale, local6.reshape(-1, 6)
        body = Body(names[i], v * scale, f.astype(np.int64), None, s["name"] or "")
        moments = curved_surface_moments(v6, f6)
        flat = surface_volume_moments(body.vertices, body.faces)
        figures = KernelFigures(
            float(s["volume"]) * scale**3, np.asarray(s["cg"], dtype=float) * scale,
            np.asarray(s["inertia"], dtype=float).reshape(3, 3) * scale**5)
        comparison = kernel_verdict(moments, flat, figures)
        bodies.append(body)
        curved.append((v6, f6))
        exact.append(moments)
        straight.append(flat)
        kernel.append(figures)
        comparisons.append(comparison)
        warning = kernel_warning(names[i], comparison, tol)
        if warning:
            warnings.append(warning)
    record = dict(raw.get("curved", {}))
    if record.get("straight_edges"):
        warnings.append(f"{record['straight_edges']} of {record['edges_on_curves'] + record['edges_in_faces']} "
                        "triangle edges could not be curved onto the CAD geometry (the kernel "
                        "found no nearby point) and stay straight")
    return CadModel(source, fmt, unit, file_unit, tuple(bodies), tuple(kernel), tol,
                    float(raw["chord"]) * scale, tuple(warnings), tuple(curved), tuple(exact),
                    record, tuple(straight), tuple(comparisons))


def _closure_problem(faces: np.ndarray) -> str:
    """"" when every edge joins exactly two faces traversing it in opposite directions."""
    a = faces.ravel()
    b = faces[:, [1, 2, 0]].ravel()
    lo, hi = np.minimum(a, b), np.maximum(a, b)
    key = lo * np.int64(faces.max() + 1) + hi
    order = np.argsort(key, kind="stable")
    sk = key[order]
    starts = np.flatnonzero(np.r_[True, sk[1:] != sk[:-1]])
    counts = np.diff(np.r_[starts, len(sk)])
    if (counts == 1).any():
        return f"{int((counts == 1).sum())} boundary edges"
    if (counts > 2).any():
        return f"{int((counts > 2).sum())} edges shared by more than two faces"
    forward = (a < b)[order]
    same = forward[starts] == forward[starts + 1]
    if same.any():
        return f"{int(same.sum())} edges with inconsistent face orientation"
    return ""


def _degenerate_problem(v: np.ndarray, f: np.ndarray) -> str:
    """"" unless some triangles have (relatively) zero area, which the filling refuses."""
    area = 0.5 * np.linalg.norm(np.cross(v[f[:, 1]] - v[f[:, 0]], v[f[:, 2]] - v[f[:, 0]]), axis=1)
    diag = float(np.linalg.norm(v.max(axis=0) - v.min(axis=0)))
    flat = int((area <= DEGENERATE_AREA_REL * diag**2).sum())
    return (f"{flat} triangles of zero area (a collapsed or needle-thin face; another "
            "cad_tolerance may avoid them)") if flat else ""


def _signed_volume(v: np.ndarray, f: np.ndarray) -> float:
    c = 0.5 * (v.min(axis=0) + v.max(axis=0))
    p = v - c
    return float(np.einsum("ij,ij->i", p[f[:, 0]], np.cross(p[f[:, 1]], p[f[:, 2]])).sum() / 6)


def _where_box(box, scale) -> str:
    lo = np.asarray(box[:3]) * scale
    hi = np.asarray(box[3:]) * scale
    fmt3 = lambda p: "(" + ", ".join(f"{x:.4g}" for x in p) + ")"  # noqa: E731
    return f"(box {fmt3(lo)} to {fmt3(hi)} m)"


# --------------------------------------------------------------------------- comparison


def blade_section(model: CadModel, rotation, translation, densities) -> dict:
    """The ``cad`` record of a blade read from ``model`` (docs/CONVENTIONS.md §6, §9), with the
    kernel's figures per body beside bladesolid's under ``"kernel"``.

    rotation, translation : the model-to-hub motion (r' = R r + t) applied to the bodies
    densities             : kg/m³ per body
    Figures are in the hub frame (CG m, inertia about the CG kg·m², the kernel's per-unit-
    density inertia times the density); relative differences as :func:`kernel_differences`.
    """
    from .moments import moved

    R = np.asarray(rotation, dtype=float)
    t = np.asarray(translation, dtype=float)
    bodies = []
    for i, (ours, kernel, comparison) in enumerate(zip(model.moments, model.kernel, model.comparisons)):
        rho = float(densities[i])
        o = moved(ours.scaled(rho), R, t)
        k = moved(kernel.moments(rho), R, t)
        bodies.append({
            "body": i + 1,
            "volume_m3": kernel.volume_m3,
            "cg_m": k.cg,
            "inertia_cg_kgm2": k.inertia_cg(),
            "relative_difference": dict(comparison.differences),
            "volume_rel": comparison.volume_rel,
            "error_estimate": comparison.error_estimate,
            "likely_inexact": comparison.likely_inexact,
            "ours": {"volume_m3": ours.mass, "cg_m": o.cg, "inertia_cg_kgm2": o.inertia_cg()},
        })
    curved = sum(m.mass for m in model.moments)
    flat = sum(m.mass for m in model.straight_moments)
    return {
        "format": model.file_format,
        "file_unit": model.file_unit.label if model.file_unit is not None else None,
        "unit": model.unit,
        "cad_tolerance": model.cad_tolerance,
        "chord_m": model.chord_m,
        "integration": INTEGRATION,
        "triangles": [int(len(b.faces)) for b in model.bodies],
        "mid_nodes": dict(model.curved_record),
        "tessellation_volume_rel_difference": flat / curved - 1.0 if curved else 0.0,
        "kernel": bodies,
    }


@dataclass(frozen=True)
class KernelComparison:
    """bladesolid's figures of one solid against the kernel's.

    differences    : relative differences ``{"volume", "cg", "inertia_cg"}`` (see
                     :func:`kernel_differences`)
    volume_rel     : signed, the kernel's volume over bladesolid's minus 1
    error_estimate : bladesolid's own error estimate, in the same measure:
                     :data:`CURVED_ERROR_SHARE` times the largest difference between the
                     curved and the straight triangles' figures
    likely_inexact : None when the two agree within ``error_estimate``; ``"kernel"`` when
                     they differ by five times it or more (bladesolid's figures are then
                     converged far beyond the difference); ``"either"`` between
    """

    differences: dict
    volume_rel: float
    error_estimate: float
    likely_inexact: str | None

    @property
    def largest(self) -> float:
        """The largest of the three relative differences."""
        return max(self.differences.values())


def kernel_verdict(curved, straight, kernel: KernelFigures, density: float = 1.0) -> KernelComparison:
    """Compare bladesolid's figures of a solid with the kernel's and say which side is likely
    off, from bladesolid's convergence.

    curved   : :class:`~bladesolid.moments.Moments` of the curved triangles (the solid's)
    straight : the same of the straight triangles (a coarser route to the same solid)
    kernel   : the kernel's figures;  ``density`` applied to both sides as to ``curved``

    A kernel 1 % off a solid whose curved figures moved 0.1 % from the straight ones (the
    estimate is then 2e-5), and 20 % (estimate 4e-3):

    >>> k = KernelFigures(6.0, np.zeros(3), np.diag([6.5, 5.0, 2.5]))
    >>> ours = k.moments(1.0)
    >>> kernel_verdict(ours, ours.scaled(0.999), k).likely_inexact is None   # agree
    True
    >>> off = KernelFigures(6.06, np.zeros(3), np.diag([6.5, 5.0, 2.5]) * 1.01)
    >>> v = kernel_verdict(ours, ours.scaled(0.999), off)
    >>> v.likely_inexact, round(v.volume_rel, 4), round(v.error_estimate, 6)
    ('kernel', 0.01, 2e-05)
    >>> kernel_verdict(ours, ours.scaled(0.8), off).likely_inexact
    'either'
    """
    differences = kernel_differences(curved, kernel, density)
    estimate = CURVED_ERROR_SHARE * max(_moment_differences(curved, straight).values())
    largest = max(differences.values())
    if largest <= max(estimate, 1e-9):
        likely = None
    elif largest >= 5.0 * estimate:
        likely = "kernel"
    else:
        likely = "either"
    volume_rel = density * kernel.volume_m3 / curved.mass - 1.0
    return KernelComparison(differences, float(volume_rel), float(estimate), likely)


def kernel_warning(name: str, comparison: KernelComparison, cad_tolerance: float) -> str:
    """The warning a comparison calls for, "" when none: a difference above
    :data:`KERNEL_WARN_REL`, or one that bladesolid's convergence cannot put on the kernel."""
    c = comparison
    d = c.largest
    what = (f"{name}: the kernel's own figures differ from bladesolid's by {d:.2g} (volume "
            f"{100 * c.volume_rel:+.3g} %)")
    if d > KERNEL_WARN_REL:
        if c.likely_inexact == "kernel":
            return (f"{what}; bladesolid's curved-triangle figures are converged to about "
                    f"{c.error_estimate:.1g} at cad_tolerance {cad_tolerance:g}, so the kernel's "
                    "are likely the inexact ones (it integrates B-spline faces inexactly), but a "
                    "difference this large is worth a look at the solid")
        return (f"{what}, more than bladesolid's error estimate {c.error_estimate:.1g} at "
                f"cad_tolerance {cad_tolerance:g}; check the solid, and read it with a smaller "
                "cad_tolerance to see which side moves")
    if c.likely_inexact == "either":
        return (f"{what}, more than bladesolid's error estimate {c.error_estimate:.1g} at "
                f"cad_tolerance {cad_tolerance:g} but too little to lay on the kernel; a smaller "
                "cad_tolerance tells which side is off")
    return ""


def kernel_differences(ours, kernel: KernelFigures, density: float = 1.0) -> dict:
    """Relative differences between bladesolid's moments of a body and the kernel's figures.

    ours    : :class:`~bladesolid.moments.Moments` of the body (mass, first and second
              moments about the model-frame origin) at ``density``
    kernel  : the kernel's figures of the same solid
    Returns ``{"volume": |ΔV|/V, "cg": |Δc|/k, "inertia_cg": ‖ΔI‖/‖I‖}`` with ``k`` the
    radius of gyration about the centroid (a CG near the origin is not divided by zero).

    >>> k = KernelFigures(6.0, np.zeros(3), np.diag([6.5, 5.0, 2.5]))
    >>> d = kernel_differences(k.moments(2810.0), k, 2810.0)
    >>> max(d.values()) < 1e-12
    True
    """
    return _moment_differences(ours, kernel.moments(density))


def _moment_differences(ours, ref) -> dict:
    """:func:`kernel_differences` between two :class:`~bladesolid.moments.Moments`."""
    i_ours, i_ref = ours.inertia_cg(), ref.inertia_cg()
    gyration = math.sqrt(max(np.trace(i_ref) / (2.0 * max(ref.mass, 1e-300)), 1e-300))
    return {
        "volume": abs(ours.mass - ref.mass) / max(ref.mass, 1e-300),
        "cg": float(np.linalg.norm(ours.cg - ref.cg)) / gyration,
        "inertia_cg": float(np.linalg.norm(i_ours - i_ref) / max(np.linalg.norm(i_ref), 1e-300)),
    }


if __name__ == "__main__":
    raise SystemExit(_worker_main(sys.argv[1]))
