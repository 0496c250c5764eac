"""CAD input (bladesolid.cad): STEP, IGES and BREP through OpenCASCADE.

The solids are built in the tests themselves with the OpenCASCADE kernel (through gmsh) and
written as STEP, IGES and BREP; the reference figures are the kernel's own (``occ.getMass``,
``getCenterOfMass``, ``getMatrixOfInertia``), trimesh's checks of the triangulation, handbook
formulas for a box, and exact unit definitions.
"""

from __future__ import annotations

import math
import os
import re

import numpy as np
import pytest

from bladesolid import cad
from bladesolid.errors import InputError
from bladesolid.moments import surface_volume_moments

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
INCH = 0.0254  # exact by definition (international inch, 1959)


# --------------------------------------------------------------------------- unit parsing (no kernel)


def _step_text(unit_records: str, context_refs: str = "#40") -> str:
    return ("ISO-10303-21;\nHEADER;\nENDSEC;\nDATA;\n"
            f"#1=(GEOMETRIC_REPRESENTATION_CONTEXT(3) GLOBAL_UNIT_ASSIGNED_CONTEXT(({context_refs}))"
            " REPRESENTATION_CONTEXT('',''));\n"
            f"{unit_records}\nENDSEC;\nEND-ISO-10303-21;\n")


@pytest.mark.parametrize("records, name, metres", [
    # ISO 10303-41 si_unit with prefix; the inch as a conversion-based unit of 25.4 mm
    # (the form CAD exporters write; exact inch definition)
    ("#40=(LENGTH_UNIT() NAMED_UNIT(*) SI_UNIT(.MILLI.,.METRE.));", "mm", 1e-3),
    ("#40=(LENGTH_UNIT() NAMED_UNIT(*) SI_UNIT($,.METRE.));", "m", 1.0),
    ("#40=(LENGTH_UNIT() NAMED_UNIT(*) SI_UNIT(.CENTI.,.METRE.));", "cm", 1e-2),
    ("#40=(CONVERSION_BASED_UNIT('INCH',#41) LENGTH_UNIT() NAMED_UNIT(#42));\n"
     "#41=LENGTH_MEASURE_WITH_UNIT(LENGTH_MEASURE(25.4),#43);\n"
     "#42=DIMENSIONAL_EXPONENTS(1.,0.,0.,0.,0.,0.,0.);\n"
     "#43=(LENGTH_UNIT() NAMED_UNIT(*) SI_UNIT(.MILLI.,.METRE.));", "in", INCH),
    ("#40=(CONVERSION_BASED_UNIT('FOOT',#41) LENGTH_UNIT() NAMED_UNIT(#42));\n"
     "#41=LENGTH_MEASURE_WITH_UNIT(LENGTH_MEASURE(12.),#43);\n"
     "#42=DIMENSIONAL_EXPONENTS(1.,0.,0.,0.,0.,0.,0.);\n"
     "#43=(CONVERSION_BASED_UNIT('INCH',#44) LENGTH_UNIT() NAMED_UNIT(#42));\n"
     "#44=LENGTH_MEASURE_WITH_UNIT(LENGTH_MEASURE(25.4),#45);\n"
     "#45=(LENGTH_UNIT() NAMED_UNIT(*) SI_UNIT(.MILLI.,.METRE.));", "ft", 12 * INCH),
])
def test_step_declared_unit(tmp_path, records, name, metres):
    p = tmp_path / "u.step"
    p.write_text(_step_text(records))
    unit = cad.declared_unit(p)
    assert unit.name == name
    assert unit.metres == pytest.approx(metres, rel=1e-12)


def test_step_unit_ignores_units_outside_the_contexts(tmp_path):
    # the millimetre inside the inch's definition is not the file's unit
    p = tmp_path / "u.step"
    p.write_text(_step_text(
        "#40=(CONVERSION_BASED_UNIT('INCH',#41) LENGTH_UNIT() NAMED_UNIT(#42));\n"
        "#41=LENGTH_MEASURE_WITH_UNIT(LENGTH_MEASURE(25.4),#43);\n"
        "#42=DIMENSIONAL_EXPONENTS(1.,0.,0.,0.,0.,0.,0.);\n"
        "#43=(LENGTH_UNIT() NAMED_UNIT(*) SI_UNIT(.MILLI.,.METRE.));\n"
        "#50=(LENGTH_UNIT() NAMED_UNIT(*) SI_UNIT($,.METRE.));"))
    assert cad.declared_unit(p).name == "in"


def test_step_with_two_length_units_is_refused(tmp_path):
    p = tmp_path / "u.step"
    p.write_text(_step_text("#40=(LENGTH_UNIT() NAMED_UNIT(*) SI_UNIT(.MILLI.,.METRE.));\n"
                            "#41=(LENGTH_UNIT() NAMED_UNIT(*) SI_UNIT($,.METRE.));", "#40,#41"))
    with pytest.raises(InputError, match="several length units"):
        cad.declared_unit(p)


def _iges_text(flag: int, name: str) -> str:
    """A minimal IGES file: start, global, terminate sections (IGES 5.3 fixed 80-column
    records: data in columns 1-72, section letter in 73, sequence number in 74-80)."""
    glob = (f"1H,,1H;,4Htest,6Hx.iges,4Htest,4Htest,32,308,15,308,15,,1.,{flag},"
            f"{len(name)}H{name},1,0.01,15H20260101.000000,1E-07,1000.,4Hroot,,11,0,;")
    lines = [glob[i:i + 72] for i in range(0, len(glob), 72)]
    out = [f"{'':72}S{1:7d}"]
    out += [f"{ln:72}G{i + 1:7d}" for i, ln in enumerate(lines)]
    out.append(f"{'S      1G' + format(len(lines), '7d'):72}T{1:7d}")
    return "\n".join(out) + "\n"


@pytest.mark.parametrize("flag, name, unit, metres", [
    # IGES 5.3 global parameter 14, units flag: 1 inch, 2 mm, 4 ft, 6 m, 10 cm; 3 = see
    # parameter 15 (from memory)
    (1, "IN", "in", INCH), (2, "MM", "mm", 1e-3), (4, "FT", "ft", 0.3048), (6, "M", "m", 1.0),
    (10, "CM", "cm", 1e-2), (3, "INCH", "in", INCH), (3, "MM", "mm", 1e-3),
])
def test_iges_declared_unit(tmp_path, flag, name, unit, metres):
    p = tmp_path / "u.igs"
    p.write_text(_iges_text(flag, name))
    got = cad.declared_unit(p)
    assert got.name == unit and got.metres == pytest.approx(metres, rel=1e-12)


def test_tolerance_out_of_range_names_the_parameter(tmp_path):
    p = tmp_path / "x.step"
    p.write_text("ISO-10303-21;\n")
    for bad in (0.0, -1e-5, 0.5, float("nan"), "fine"):
        with pytest.raises(InputError, match="^cad_tolerance: "):
            cad.read_cad(p, cad_tolerance=bad)


def test_missing_kernel_gives_the_install_hint(tmp_path, monkeypatch):
    import importlib.util

    p = tmp_path / "box.step"
    p.write_text(_step_text("#40=(LENGTH_UNIT() NAMED_UNIT(*) SI_UNIT(.MILLI.,.METRE.));"))
    real = importlib.util.find_spec
    monkeypatch.setattr(importlib.util, "find_spec",
                        lambda name, *a: None if name == "gmsh" else real(name, *a))
    with pytest.raises(InputError) as err:
        cad.read_cad(p)
    assert str(err.value) == (f"{p}: reading STEP needs the optional gmsh package: "
                              "pip install 'bladesolid[cad]'")


@pytest.mark.parametrize("name, data, expected", [
    ("empty.step", b"", "empty"),
    ("garbage.step", bytes(range(256)) * 4, "not a STEP file"),
    ("garbage.igs", b"\x00\x01 not an iges file\n" * 20, "not an IGES file"),
])
def test_unreadable_files_refused_before_the_kernel(tmp_path, name, data, expected):
    p = tmp_path / name
    p.write_bytes(data)
    with pytest.raises(InputError, match=expected) as err:
        cad.read_cad(p, "mm")
    assert str(err.value).startswith(str(p)) and "\n" not in str(err.value)


# --------------------------------------------------------------------------- files made by the kernel

gmsh = pytest.importorskip("gmsh")  # everything below needs the optional kernel

from .cadhelp import STATIONS  # noqa: E402
from .cadhelp import add_blade as _add_blade  # noqa: E402
from .cadhelp import inch_step as _inch_step  # noqa: E402
from .cadhelp import write_model as _write  # noqa: E402

@pytest.fixture(scope="module")
def files(tmp_path_factory):
    """The test blade as STEP (mm, m, inch), IGES (mm, inch) and BREP, plus the kernel's
    figures of the millimetre model (mm^3, mm, mm^5)."""
    d = tmp_path_factory.mktemp("cad")
    out = {}
    out["figures_mm"] = _write(d / "blade_mm.step", lambda: _add_blade(1000.0))[0]
    _write(d / "blade.brep", lambda: _add_blade(1000.0))
    _write(d / "blade_mm.igs", lambda: _add_blade(1000.0))
    # metres: the same solid built in metres, the file's unit relabelled from mm to m
    _write(d / "raw_m.step", lambda: _add_blade(1.0))
    text = (d / "raw_m.step").read_text(encoding="latin-1")
    assert text.count("SI_UNIT(.MILLI.,.METRE.)")
    (d / "blade_m.step").write_text(text.replace("SI_UNIT(.MILLI.,.METRE.)", "SI_UNIT($,.METRE.)"),
                                    encoding="latin-1")
    # inches: built in inches, relabelled
    _write(d / "raw_in.step", lambda: _add_blade(1000.0 / 25.4))
    (d / "blade_in.step").write_text(_inch_step((d / "raw_in.step").read_text("latin-1")),
                                     encoding="latin-1")
    _write(d / "raw_in.igs", lambda: _add_blade(1000.0 / 25.4))
    iges = (d / "raw_in.igs").read_text(encoding="latin-1")
    assert ",2,2HMM," in iges  # global parameters 14/15: units flag 2, name MM
    (d / "blade_in.igs").write_text(iges.replace(",2,2HMM,", ",1,2HIN,", 1), encoding="latin-1")
    for key in ("blade_mm.step", "blade_m.step", "blade_in.step", "blade_mm.igs",
                "blade_in.igs", "blade.brep"):
        out[key] = d / key
    out["dir"] = d
    return out


def _check_closed(body):
    import trimesh

    mesh = trimesh.Trimesh(body.vertices, body.faces, process=False)
    assert mesh.is_watertight and mesh.is_winding_consistent  # trimesh's own checks
    assert mesh.volume > 0  # outward normals


def test_step_blade_against_the_kernel(files):
    model = cad.read_cad(files["blade_mm.step"])
    assert model.file_format == "STEP" and model.unit == "mm"
    assert model.file_unit.text == "SI_UNIT(.MILLI.,.METRE.)"
    assert len(model.bodies) == 1 and model.bodies[0].name == "body 1"
    body, kernel = model.bodies[0], model.kernel[0]
    _check_closed(body)
    # the kernel's figures, converted to metres, are the figures of the built model
    vol, cg, inertia = files["figures_mm"]
    assert kernel.volume_m3 == pytest.approx(vol * 1e-9, rel=1e-9)
    np.testing.assert_allclose(kernel.cg_m, cg * 1e-3, rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(kernel.inertia_cg_m5, inertia * 1e-15, rtol=1e-9,
                               atol=1e-12 * np.abs(inertia).max() * 1e-15)
    # the solid's figures, from the curved (six-node) triangles, against the kernel's: the loft's
    # faces are circular-arc sections lofted smoothly, where the kernel's figures are right;
    # at the default tolerance the curved triangles agree within 1e-5 (measured 9e-7, 6e-7,
    # 1e-6), the straight ones lie inside the curved surface and lose 2.7e-3 (measured)
    diff = cad.kernel_differences(model.moments[0], kernel)
    assert diff["volume"] < 1e-5 and diff["cg"] < 1e-5 and diff["inertia_cg"] < 1e-5
    straight = surface_volume_moments(body.vertices, body.faces)
    assert straight.mass < model.moments[0].mass  # chords inside a convex section
    assert cad.kernel_differences(straight, kernel)["volume"] < 4e-3
    assert model.straight_moments[0].mass == pytest.approx(straight.mass, rel=1e-12)
    comparison = model.comparisons[0]
    assert comparison.likely_inexact is None and comparison.largest < 1e-5
    assert not any("kernel" in w for w in model.warnings)
    assert model.curved_record["straight_edges"] == 0
    assert model.chord_m == pytest.approx(cad.DEFAULT_CAD_TOLERANCE * math.dist(
        body.vertices.min(axis=0), body.vertices.max(axis=0)), rel=1e-3)


def _edges_of(tri6):
    """(corner pair sorted, mid node) of every triangle edge."""
    pairs = np.vstack([tri6[:, [0, 1]], tri6[:, [1, 2]], tri6[:, [2, 0]]])
    mids = np.concatenate([tri6[:, 3], tri6[:, 4], tri6[:, 5]])
    return np.sort(pairs, axis=1), mids


def test_curved_triangles_are_watertight_and_on_the_surface(files):
    model = cad.read_cad(files["blade_mm.step"], cad_tolerance=1e-3)
    nodes, tri6 = model.curved[0]
    pairs, mids = _edges_of(tri6)
    # every edge is used by exactly two triangles, which share its mid node
    order = np.lexsort((pairs[:, 1], pairs[:, 0]))
    p, m = pairs[order], mids[order]
    assert len(p) % 2 == 0
    assert (p[0::2] == p[1::2]).all() and (m[0::2] == m[1::2]).all()
    assert len(np.unique(m)) == len(m) // 2
    # the corners are the straight triangulation's vertices, in the same order of faces
    body = model.bodies[0]
    np.testing.assert_array_equal(nodes[tri6[:, :3]], body.vertices[body.faces])
    # mid nodes bulge out of the straight edge (convex sections) by less than the chord
    # tolerance allows, and near its middle
    a, b, c = nodes[p[0::2, 0]], nodes[p[0::2, 1]], nodes[m[0::2]]
    t = np.einsum("ij,ij->i", c - a, b - a) / np.einsum("ij,ij->i", b - a, b - a)
    off = np.linalg.norm(c - (a + t[:, None] * (b - a)), axis=1)
    assert np.all(np.abs(t - 0.5) < 0.05) and off.max() <= 1.5 * model.chord_m
    assert np.median(off) > 0


@pytest.mark.parametrize("shape", ["sphere", "cylinder", "box"])
@pytest.mark.parametrize("tolerance", [1e-3, None])
def test_curved_triangles_against_the_handbook(tmp_path, shape, tolerance):
    # Marks' Standard Handbook, table of mass moments of inertia: solid sphere I = 2/5 m r^2;
    # solid cylinder I_axis = m r^2 / 2, I_transverse = m (3 r^2 + h^2) / 12; block
    # I_x = m (b^2 + c^2) / 12 (from memory). Curved triangles converge about as the square of
    # the chord tolerance: measured at 1e-3 of the diagonal 3e-6 (sphere) and 2e-6
    # (cylinder) of the volume, at the default 2e-4 below 2e-7; a box is exact.
    p = tmp_path / f"{shape}.step"
    if shape == "sphere":
        r = 0.05
        _write(p, lambda: gmsh.model.occ.addSphere(10, 20, 30, 1000 * r))
        v = 4 / 3 * math.pi * r**3
        cg, inertia = [0.01, 0.02, 0.03], np.eye(3) * 0.4 * v * r * r
    elif shape == "cylinder":
        r, h = 0.04, 0.3
        _write(p, lambda: gmsh.model.occ.addCylinder(0, 0, 0, 0, 0, 1000 * h, 1000 * r))
        v = math.pi * r * r * h
        cg = [0.0, 0.0, h / 2]
        inertia = np.diag([v * (3 * r * r + h * h) / 12] * 2 + [v * r * r / 2])
    else:
        a, b, c = 0.1, 0.2, 0.3
        _write(p, lambda: gmsh.model.occ.addBox(10, 20, 30, 1000 * a, 1000 * b, 1000 * c))
        v = a * b * c
        cg = [0.06, 0.12, 0.18]
        inertia = np.diag([v * (b * b + c * c) / 12, v * (a * a + c * c) / 12, v * (a * a + b * b) / 12])
    model = cad.read_cad(p, cad_tolerance=tolerance)
    handbook = cad.KernelFigures(v, np.array(cg), inertia)
    bound = {"box": 1e-12}.get(shape, 1e-5 if tolerance else 1e-6)
    assert max(cad.kernel_differences(model.moments[0], handbook).values()) < bound
    # the kernel is exact on these analytic faces
    assert max(cad.kernel_differences(model.kernel[0].moments(), handbook).values()) < 1e-12
    if shape != "box":  # the straight triangles are two orders of magnitude further off
        straight = cad.kernel_differences(model.straight_moments[0], handbook)["volume"]
        assert straight > 50 * cad.kernel_differences(model.moments[0], handbook)["volume"]
    if shape == "sphere":  # the mid nodes lie on the sphere
        nodes, tri6 = model.curved[0]
        radius = np.linalg.norm(nodes[tri6[:, 3:]] - np.array(cg), axis=-1)
        np.testing.assert_allclose(radius, r, rtol=1e-9)


def test_finer_tolerance_converges_to_the_kernel(files):
    # the volume lost between chords and surface scales with the chord tolerance: ten
    # times finer, several times closer (common practice, no source; measured 1.7e-3 and
    # 1.6e-4 on this solid); the curved triangles' error falls about as its square (measured
    # 1.0e-5 and 7e-8)
    coarse = cad.read_cad(files["blade_mm.step"], cad_tolerance=1e-3)
    fine = cad.read_cad(files["blade_mm.step"], cad_tolerance=1e-4)
    errs, curved = [], []
    for model in (coarse, fine):
        ours = surface_volume_moments(model.bodies[0].vertices, model.bodies[0].faces)
        errs.append(cad.kernel_differences(ours, model.kernel[0]))
        curved.append(cad.kernel_differences(model.moments[0], model.kernel[0]))
    assert len(fine.bodies[0].faces) > 5 * len(coarse.bodies[0].faces)
    for key in ("volume", "inertia_cg"):
        assert errs[1][key] < errs[0][key] / 4
        assert curved[1][key] < curved[0][key] / 20
        assert curved[0][key] < errs[0][key] / 100
    assert errs[1]["volume"] < 3e-3 and curved[1]["volume"] < 1e-6


def test_units_honoured_metre_millimetre_inch(files):
    models = {k: cad.read_cad(files[k], cad_tolerance=1e-4)
              for k in ("blade_mm.step", "blade_m.step", "blade_in.step")}
    assert [m.unit for m in models.values()] == ["mm", "m", "in"]
    assert models["blade_m.step"].file_unit.text == "SI_UNIT($,.METRE.)"
    ref = models["blade_mm.step"]
    for key in ("blade_m.step", "blade_in.step"):
        m = models[key]
        # the kernel's figures of the same solid, whatever the file's unit (the loft built
        # at another scale comes out ~1e-6 different: the kernel's fitting works in its units)
        assert m.kernel[0].volume_m3 == pytest.approx(ref.kernel[0].volume_m3, rel=1e-5)
        np.testing.assert_allclose(m.kernel[0].cg_m, ref.kernel[0].cg_m, rtol=1e-5, atol=1e-8)
        # and the same mass from bladesolid's integral of the triangulation, within what the
        # triangulation at 1e-4 of the diagonal resolves (the kernel meshes each file's
        # slightly different surfaces afresh: 4e-4 apart, measured; each ~1.7e-3 low)
        a = surface_volume_moments(m.bodies[0].vertices, m.bodies[0].faces).mass
        b = surface_volume_moments(ref.bodies[0].vertices, ref.bodies[0].faces).mass
        assert a == pytest.approx(b, rel=1e-3)
        assert a == pytest.approx(m.kernel[0].volume_m3, rel=2.5e-3)
        # the curved triangles give the same mass whatever the file's unit (measured 1e-6 apart)
        assert m.moments[0].mass == pytest.approx(ref.moments[0].mass, rel=1e-5)
        np.testing.assert_allclose(m.moments[0].cg, ref.moments[0].cg, rtol=1e-5, atol=1e-8)
    # a units that agrees with the file is accepted
    assert cad.read_cad(files["blade_in.step"], "in", cad_tolerance=1e-3).unit == "in"


def test_units_that_disagree_name_both(files):
    with pytest.raises(InputError) as err:
        cad.read_cad(files["blade_mm.step"], "in")
    msg = str(err.value)
    assert msg.startswith(str(files["blade_mm.step"])) and "'in'" in msg and "mm" in msg


def test_iges_surfaces_are_sewn_and_units_read(files):
    step = cad.read_cad(files["blade_mm.step"], cad_tolerance=1e-4)
    for key, unit in (("blade_mm.igs", "mm"), ("blade_in.igs", "in")):
        model = cad.read_cad(files[key], cad_tolerance=1e-4)
        assert model.file_format == "IGES" and model.unit == unit
        assert len(model.bodies) == 1
        assert any("sewn" in w for w in model.warnings)
        _check_closed(model.bodies[0])
        # IGES carries the surfaces re-approximated by the writer: the kernel's volume
        # agrees with the STEP solid's to ~1e-5 (measured)
        assert model.kernel[0].volume_m3 == pytest.approx(step.kernel[0].volume_m3, rel=1e-4)


def test_brep_needs_units(files):
    with pytest.raises(InputError, match="BREP file carries no length unit; give units"):
        cad.read_cad(files["blade.brep"])
    mm = cad.read_cad(files["blade.brep"], "mm", cad_tolerance=1e-4)
    assert mm.file_unit is None and mm.unit == "mm"
    ref = cad.read_cad(files["blade_mm.step"], cad_tolerance=1e-4)
    assert mm.kernel[0].volume_m3 == pytest.approx(ref.kernel[0].volume_m3, rel=1e-9)
    m = cad.read_cad(files["blade.brep"], "m", cad_tolerance=1e-4)
    assert m.kernel[0].volume_m3 == pytest.approx(1e9 * mm.kernel[0].volume_m3, rel=1e-12)


def test_box_inertia_from_the_handbook(tmp_path):
    # solid rectangular block a x b x c about its centroid: I_x = m (b^2 + c^2) / 12
    # (Marks' Standard Handbook, table of mass moments of inertia)
    p = tmp_path / "box.step"
    _write(p, lambda: gmsh.model.occ.addBox(10, 20, 30, 100, 200, 300))
    model = cad.read_cad(p)
    k = model.kernel[0]
    a, b, c = 0.1, 0.2, 0.3
    v = a * b * c
    assert k.volume_m3 == pytest.approx(v, rel=1e-12)
    np.testing.assert_allclose(k.cg_m, [0.06, 0.12, 0.18], rtol=1e-12)
    np.testing.assert_allclose(k.inertia_cg_m5, np.diag([v * (b * b + c * c) / 12,
                                                         v * (a * a + c * c) / 12,
                                                         v * (a * a + b * b) / 12]),
                               rtol=1e-12, atol=1e-18)
    # a planar-faced solid is triangulated exactly
    ours = surface_volume_moments(model.bodies[0].vertices, model.bodies[0].faces)
    assert max(cad.kernel_differences(ours, k).values()) < 1e-12
    density = 2810.0
    assert k.moments(density).inertia_cg() == pytest.approx(density * k.inertia_cg_m5)


def test_touching_solids_in_file_order(tmp_path):
    p = tmp_path / "two.step"

    def build():
        gmsh.model.occ.addBox(0, 0, 0, 100, 100, 100)   # the larger first
        gmsh.model.occ.addBox(100, 0, 0, 50, 50, 50)     # shares part of a face
    _write(p, build)
    model = cad.read_cad(p, cad_tolerance=1e-3)
    assert [b.name for b in model.bodies] == ["body 1", "body 2"]
    assert [round(k.volume_m3, 12) for k in model.kernel] == [1e-3, 1.25e-4]
    for body in model.bodies:
        _check_closed(body)


def test_overlapping_boxes_refused(tmp_path):
    p = tmp_path / "overlap.step"

    def build():
        gmsh.model.occ.addBox(0, 0, 0, 100, 100, 100)
        gmsh.model.occ.addBox(50, 50, 50, 100, 100, 100)
    _write(p, build)
    with pytest.raises(InputError, match=r"body 1 and body 2 overlap: they share 0\.000125 m\^3"):
        cad.read_cad(p, cad_tolerance=1e-3)


def test_nested_solid_reported_as_inside(tmp_path):
    p = tmp_path / "insert.step"

    def build():
        gmsh.model.occ.addBox(0, 0, 0, 100, 100, 100)
        gmsh.model.occ.addBox(25, 25, 25, 10, 10, 10)   # a slug inside, cavity not cut
    _write(p, build)
    with pytest.raises(InputError, match="body 2 lies inside body 1"):
        cad.read_cad(p, cad_tolerance=1e-3)


def test_only_a_surface_is_refused(tmp_path):
    for name in ("plate.step", "plate.igs"):
        p = tmp_path / name
        _write(p, lambda: gmsh.model.occ.addRectangle(0, 0, 0, 100, 50))
        with pytest.raises(InputError, match="contains no solid, only 1 surface, 4 curves"):
            cad.read_cad(p)


def test_open_shell_is_refused(tmp_path):
    # a box whose CLOSED_SHELL lists five of its six faces: the file still says "solid"
    p = tmp_path / "box.step"
    _write(p, lambda: gmsh.model.occ.addBox(0, 0, 0, 100, 200, 300))
    text = p.read_text(encoding="latin-1")
    shell = re.search(r"CLOSED_SHELL\('',\((#\d+),", text)
    assert shell
    text = text.replace(f"CLOSED_SHELL('',({shell.group(1)},", "CLOSED_SHELL('',(", 1)
    p.write_text(text, encoding="latin-1")
    with pytest.raises(InputError, match="not a closed solid|no volume|no solid") as err:
        cad.read_cad(p, cad_tolerance=1e-3)
    assert "\n" not in str(err.value)


def test_open_shell_kept_as_a_solid_is_refused(tmp_path):
    # a solid made from five of a box's six faces: the kernel keeps it as a volume (BREP
    # stores it as it is), the triangulation shows the hole
    p = tmp_path / "open.brep"

    def build():
        occ = gmsh.model.occ
        box = occ.addBox(0, 0, 0, 100, 200, 300)
        occ.synchronize()
        faces = [t for _, t in gmsh.model.getBoundary([(3, box)], oriented=False)]
        occ.remove([(3, box)])
        occ.addVolume([occ.addSurfaceLoop(faces[:5])])
        occ.remove([(2, faces[5])])
    _write(p, build)
    with pytest.raises(InputError, match=r"body 1 .* is not a closed solid: 4 boundary edges"):
        cad.read_cad(p, "mm", cad_tolerance=1e-3)


def test_kernel_read_failures(files, tmp_path):
    text = files["blade_mm.step"].read_text(encoding="latin-1")
    truncated = tmp_path / "truncated.step"
    truncated.write_text(text[: len(text) // 2], encoding="latin-1")
    with pytest.raises(InputError, match="truncated"):
        cad.read_cad(truncated)
    # right header and end line, garbage between: the kernel finds nothing to read
    hollow = tmp_path / "hollow.step"
    hollow.write_text("ISO-10303-21;\nHEADER;\nENDSEC;\nDATA;\n#1=(LENGTH_UNIT() NAMED_UNIT(*) "
                      "SI_UNIT(.MILLI.,.METRE.));\n#2=GLOBAL_UNIT_ASSIGNED_CONTEXT((#1));\n"
                      "#3=???;\nENDSEC;\nEND-ISO-10303-21;\n")
    with pytest.raises(InputError, match="cannot be read as STEP|contains no solid"):
        cad.read_cad(hollow)
    brep = tmp_path / "garbage.brep"
    brep.write_bytes(b"\x89garbage" * 100)
    with pytest.raises(InputError, match="is not a BREP file"):
        cad.read_cad(brep, "mm")
    # a BREP header over garbage: the kernel reads no shape
    brep.write_bytes(b"DBRep_DrawableShape\n\nCASCADE Topology V1, (c) Matra-Datavision\n"
                     + b"garbage " * 100)
    with pytest.raises(InputError, match="cannot be read as BREP"):
        cad.read_cad(brep, "mm")


def test_nothing_reaches_the_console(files, capfd):
    capfd.readouterr()
    cad.read_cad(files["blade_mm.igs"], cad_tolerance=1e-3)   # the IGES reader prints
    with pytest.raises(InputError):
        cad.read_cad(files["blade_mm.step"], "in")
    out, err = capfd.readouterr()
    assert out == "" and err == ""


def test_reads_from_several_threads(files):
    # each read has its own kernel process, so threads do not share the kernel's state
    from concurrent.futures import ThreadPoolExecutor

    keys = ["blade_mm.step", "blade_in.step", "blade_mm.igs", "blade_m.step"]
    with ThreadPoolExecutor(4) as pool:
        models = list(pool.map(lambda k: cad.read_cad(files[k], cad_tolerance=1e-3), keys))
    assert [m.unit for m in models] == ["mm", "in", "mm", "m"]
    vols = [m.kernel[0].volume_m3 for m in models]
    assert max(vols) / min(vols) - 1 < 1e-4


def test_timeout_is_an_input_error(files):
    with pytest.raises(InputError, match="did not finish reading within"):
        cad.read_cad(files["blade_mm.step"], timeout=1e-3)


def test_loaded_mesh_for_the_pipeline(files):
    from bladesolid.io import LoadedMesh

    model = cad.read_cad(files["blade_mm.step"], cad_tolerance=1e-3)
    loaded = model.loaded_mesh()
    assert isinstance(loaded, LoadedMesh)
    assert loaded.units == "mm" and loaded.file_format == "STEP" and loaded.bodies == model.bodies


# --------------------------------------------------------------------------- the kernel's own figures


def _add_spline_loft(points: int):
    """A loft through NACA 4-digit-like sections (12 % thick, 4 % camber; half-thickness
    formula from memory), each side a spline through ``points`` cosine-spaced points, mm."""
    occ = gmsh.model.occ
    wires = []
    x = 0.5 * (1 - np.cos(np.linspace(0, np.pi, points)))
    half = 0.6 * (0.2969 * np.sqrt(x) - 0.1260 * x - 0.3516 * x**2 + 0.2843 * x**3 - 0.1036 * x**4)
    camber = 0.16 * x * (1 - x)
    for y, c, twist in STATIONS:
        ca, sa = math.cos(twist), math.sin(twist)

        def side(z):
            return [occ.addPoint(1000 * ((xx - 0.5) * c * ca - zz * c * sa), 1000 * y,
                                 1000 * ((xx - 0.5) * c * sa + zz * c * ca)) for xx, zz in zip(x, z)]
        upper, lower = side(camber + half), side(camber - half)
        lower[0], lower[-1] = upper[0], upper[-1]
        wires.append(occ.addWire([occ.addSpline(upper), occ.addSpline(lower[::-1])]))
    occ.addThruSections(wires, makeSolid=True, makeRuled=False)


@pytest.mark.slow
def test_kernel_figures_inexact_on_a_spline_loft(tmp_path):
    # OpenCASCADE's volume of a loft through spline sections is not its exact volume: the
    # curved triangles' figure is the same to 2e-5 at three tolerances, the straight
    # triangles' falls towards it in proportion to the tolerance (measured: 3.5e-3 below at
    # the default, 9e-4 at 5e-5), while the kernel's stays 0.21 % above it (measured).
    # The verdict lays the difference on the kernel, and below KERNEL_WARN_REL it is no
    # warning.
    p = tmp_path / "spline_loft.step"
    kernel_volume = _write(p, lambda: _add_spline_loft(8))[0][0] * 1e-9
    models = [cad.read_cad(p, cad_tolerance=t) for t in (None, 1e-4, 5e-5)]
    curved = [m.moments[0].mass for m in models]
    straight = [m.straight_moments[0].mass for m in models]
    assert max(curved) / min(curved) - 1 < 2e-5
    assert straight[0] < straight[1] < straight[2] < curved[2]
    assert curved[2] - straight[2] < (curved[2] - straight[0]) / 3
    assert kernel_volume == pytest.approx(models[0].kernel[0].volume_m3, rel=1e-9)
    assert 1e-3 < kernel_volume / curved[2] - 1 < 3e-3
    verdict = models[0].comparisons[0]
    assert verdict.likely_inexact == "kernel" and verdict.largest < cad.KERNEL_WARN_REL
    assert not any("kernel's own figures" in w for w in models[0].warnings)


def test_kernel_warning_names_the_tolerance_and_the_side():
    k = cad.KernelFigures(6.0, np.zeros(3), np.diag([6.5, 5.0, 2.5]))
    ours = k.moments()
    big = cad.KernelFigures(6.3, np.zeros(3), np.diag([6.5, 5.0, 2.5]) * 1.05)
    # converged far beyond a 5 % difference: the kernel's side, still a warning
    text = cad.kernel_warning("body 1", cad.kernel_verdict(ours, ours.scaled(0.999), big), 2e-4)
    assert text.startswith("body 1: the kernel's own figures differ") and "(volume +5 %)" in text
    assert "cad_tolerance 0.0002" in text and "kernel's are likely the inexact ones" in text
    # a difference our own convergence does not explain away: which side is open
    small = cad.KernelFigures(6.006, np.zeros(3), np.diag([6.5, 5.0, 2.5]))
    text = cad.kernel_warning("body 2", cad.kernel_verdict(ours, ours.scaled(0.98), small), 1e-3)
    assert "too little to lay on the kernel" in text and "cad_tolerance 0.001" in text
    # agreement: nothing
    assert cad.kernel_warning("body 3", cad.kernel_verdict(ours, ours.scaled(0.99), k), 2e-4) == ""


# --------------------------------------------------------------------------- the demo blade


@pytest.fixture(scope="module")
def demo_step():
    return cad.read_cad(os.path.join(ROOT, "meshes", "demo_blade.step"), "mm")


def test_demo_step_blade_matches_the_stl_blade(demo_step):
    from bladesolid.io import read_mesh

    step = demo_step
    stl = read_mesh(os.path.join(ROOT, "meshes", "demo_blade.stl"), "mm")
    assert step.unit == "mm" and len(step.bodies) == 1
    _check_closed(step.bodies[0])
    v_step = surface_volume_moments(step.bodies[0].vertices, step.bodies[0].faces).mass
    v_stl = surface_volume_moments(stl.bodies[0].vertices, stl.bodies[0].faces).mass
    # The STEP side surface passes through every ring point of the STL; the STL is flat
    # between ring points (inscribed, 3.4e-4 below the smooth surface, measured against the
    # exact integral of the next test), the straight triangulation at the default tolerance is
    # inscribed too (2.3e-3 below, measured), and the curved triangles lie on the surface
    # (2.4e-6 off, measured).
    assert v_step == pytest.approx(v_stl, rel=3e-3)
    v_curved = step.moments[0].mass
    assert v_stl < v_curved and v_curved == pytest.approx(v_stl, rel=6e-4)
    cg_stl = surface_volume_moments(stl.bodies[0].vertices, stl.bodies[0].faces).cg
    np.testing.assert_allclose(step.moments[0].cg, cg_stl, atol=2e-4)
    np.testing.assert_allclose(
        surface_volume_moments(step.bodies[0].vertices, step.bodies[0].faces).cg, cg_stl, atol=1e-3)


def _exact_demo_moments():
    """The demo STEP blade's volume moments (mm^3, mm^4, mm^5) integrated independently: its
    side is one bicubic B-spline surface, a polynomial in each knot span, so Gauss-Legendre
    rules of 8 points a direction in each span integrate the divergence-theorem integrands
    (degree <= 14 in each parameter) exactly; its two ends are planar faces bounded by the
    surface's end rings, integrated by Green's theorem along them (same rule).
    ∫ f dV = 1/(p+3) ∮ f x·n dA for f homogeneous of degree p (Euler; from memory)."""
    from bladesolid.demo import blade_bspline_poles

    _, knots_u, knots_v = blade_bspline_poles()
    gmsh.initialize(interruptible=False, readConfigFiles=False)
    try:
        gmsh.option.setNumber("General.Terminal", 0)
        gmsh.model.occ.importShapes(os.path.join(ROOT, "meshes", "demo_blade.step"))
        gmsh.model.occ.synchronize()
        side = next(t for _, t in gmsh.model.getEntities(2)
                    if gmsh.model.getType(2, t) == "BSpline surface")
        xg, wg = np.polynomial.legendre.leggauss(8)

        def rule(knots):
            k = np.unique(np.round(knots, 14))
            k = (k - k[0]) / (k[-1] - k[0])
            lo, hi = k[:-1, None], k[1:, None]
            return ((hi - lo) / 2 * xg + (hi + lo) / 2).ravel(), ((hi - lo) / 2 * wg).ravel()

        def surface(par):
            x = np.array(gmsh.model.getValue(2, side, par.ravel().tolist())).reshape(-1, 3)
            d = np.array(gmsh.model.getDerivative(2, side, par.ravel().tolist())).reshape(-1, 2, 3)
            return x, d

        # gmsh's first parameter runs around the rings (the u knots), the second along the span
        (tu, wu), (tv, wv) = rule(knots_u), rule(knots_v)
        U, V = np.meshgrid(tu, tv, indexing="ij")
        x, d = surface(np.column_stack([U.ravel(), V.ravel()]))
        assert np.ptp(surface(np.array([[0.3, 0.0], [0.6, 0.0]]))[0][:, 1]) < 1e-9
        g = np.einsum("qi,qi->q", x, np.cross(d[:, 0], d[:, 1])) * np.outer(wu, wv).ravel()
        centre = x.mean(axis=0)
        sign = np.sign(np.einsum("qi,qi->q", np.cross(d[:, 0], d[:, 1]), x - centre).sum())
        vol, first, second = (sign * g.sum() / 3, sign * (g[:, None] * x).sum(0) / 4,
                              sign * np.einsum("q,qi,qj->ij", g, x, x) / 5)
        for v_end in (0.0, 1.0):  # the planar ends y = y0: x·n = ±y0, ∫ f dA by Green's theorem
            ring, dr = surface(np.column_stack([tu, np.full_like(tu, v_end)]))
            y0 = ring[:, 1].mean()
            X, Z, dZ = ring[:, 0], ring[:, 2], dr[:, 0, 2]

            def area_moment(a, b):  # ∫ X^a Z^b dA = ∮ X^(a+1) Z^b / (a+1) dZ
                return np.sum(wu * X ** (a + 1) * Z**b * dZ) / (a + 1)
            orient = np.sign(area_moment(0, 0))
            A, Mx, Mz = (orient * area_moment(*ab) for ab in ((0, 0), (1, 0), (0, 1)))
            Mxx, Mzz, Mxz = (orient * area_moment(*ab) for ab in ((2, 0), (0, 2), (1, 1)))
            outward = -1.0 if y0 < centre[1] else 1.0
            xn = outward * y0
            vol += xn * A / 3
            first += xn * np.array([Mx, y0 * A, Mz]) / 4
            second += xn * np.array([[Mxx, y0 * Mx, Mxz], [y0 * Mx, y0 * y0 * A, y0 * Mz],
                                     [Mxz, y0 * Mz, Mzz]]) / 5
    finally:
        gmsh.finalize()
    from bladesolid.moments import Moments

    return Moments(float(vol), first, second)


@pytest.mark.slow
def test_demo_step_blade_exact_integral_against_ours_and_the_kernel(demo_step):
    exact = _exact_demo_moments()
    scale = 1e-3  # mm -> m
    exact = cad.KernelFigures(exact.mass * scale**3, exact.cg * scale, exact.inertia_cg() * scale**5)
    ours = cad.kernel_differences(demo_step.moments[0], exact)
    kernel = cad.kernel_differences(demo_step.kernel[0].moments(), exact)
    # bladesolid's curved triangles: within 1e-5 at the default tolerance (measured 2.4e-6,
    # 1.2e-6, 4.3e-6); the kernel's own figures are not exact on this B-spline face
    # (measured +0.519 % volume, 1.4e-3 CG, 1.9e-3 inertia)
    assert max(ours.values()) < 1e-5
    assert demo_step.kernel[0].volume_m3 / exact.volume_m3 - 1 == pytest.approx(5.19e-3, abs=2e-4)
    assert kernel["cg"] > 1e-3 and kernel["inertia_cg"] > 1e-3
    # so the verdict lays the difference on the kernel and, at 0.5 %, does not warn
    comparison = demo_step.comparisons[0]
    assert comparison.likely_inexact == "kernel"
    assert comparison.volume_rel == pytest.approx(5.19e-3, abs=2e-4)
    assert not any("kernel's own figures" in w for w in demo_step.warnings)
