"""Solids built with the OpenCASCADE kernel (through gmsh) and written as CAD files, shared by the
tests of CAD input (tests/test_cad.py, tests/test_cli.py). gmsh is imported inside the functions
(the optional CAD extra); the reference figures are the kernel's own."""

from __future__ import annotations

import math
import os

import numpy as np

#: The test blade: four cambered circular-arc sections (upper arc rising 10 % of the chord,
#: lower arc 1 %: a crescent-like cambered section; circular-arc sections are a classical
#: propeller section family, from memory), tapered and twisted, lofted smoothly; metres.
STATIONS = ((0.10, 0.20, 0.55), (0.40, 0.17, 0.40), (0.70, 0.13, 0.30), (1.00, 0.08, 0.20))


def add_blade(scale: float):
    """The test blade in the current gmsh model, coordinates times ``scale``."""
    import gmsh

    occ = gmsh.model.occ
    wires = []
    for y, c, twist in STATIONS:
        ca, sa = math.cos(twist), math.sin(twist)

        def point(x, z):
            return occ.addPoint(scale * (x * ca - z * sa), scale * y, scale * (x * sa + z * ca))

        le, te = point(-0.5 * c, 0.0), point(0.5 * c, 0.0)
        upper = occ.addCircleArc(le, point(0.0, 0.10 * c), te, center=False)
        lower = occ.addCircleArc(te, point(0.0, 0.01 * c), le, center=False)
        wires.append(occ.addWire([upper, lower]))
    return occ.addThruSections(wires, makeSolid=True, makeRuled=False)


def write_model(path, build):
    """Build a model with ``build()`` in a fresh gmsh session and write it (the writer's
    report on the C stdout silenced); returns the kernel's (volume, cg, inertia) of each
    volume, in the model's own unit."""
    import gmsh

    gmsh.initialize(interruptible=False, readConfigFiles=False)
    try:
        gmsh.option.setNumber("General.Terminal", 0)
        build()
        gmsh.model.occ.synchronize()
        figures = [(gmsh.model.occ.getMass(3, t), np.array(gmsh.model.occ.getCenterOfMass(3, t)),
                    np.array(gmsh.model.occ.getMatrixOfInertia(3, t)).reshape(3, 3))
                   for _, t in gmsh.model.getEntities(3)]
        saved, devnull = os.dup(1), os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, 1)
        try:
            gmsh.write(str(path))
        finally:
            os.dup2(saved, 1)
            os.close(saved)
            os.close(devnull)
    finally:
        gmsh.finalize()
    return figures


def inch_step(text: str) -> str:
    """A millimetre STEP file relabelled in inches: every length unit of the contexts becomes
    the conversion-based inch (25.4 mm). Coordinates stay as they are."""
    extra = ("#900001=LENGTH_MEASURE_WITH_UNIT(LENGTH_MEASURE(25.4),#900003);\n"
             "#900002=DIMENSIONAL_EXPONENTS(1.,0.,0.,0.,0.,0.,0.);\n"
             "#900003=(LENGTH_UNIT() NAMED_UNIT(*) SI_UNIT(.MILLI.,.METRE.));\n")
    text = text.replace("( LENGTH_UNIT() NAMED_UNIT(*) SI_UNIT(.MILLI.,.METRE.) )",
                        "( CONVERSION_BASED_UNIT('INCH',#900001) LENGTH_UNIT() "
                        "NAMED_UNIT(#900002) )")
    return text.replace("ENDSEC;\nEND-ISO-10303-21;", extra + "ENDSEC;\nEND-ISO-10303-21;")


def inch_blade_step(path):
    """The test blade built in inches and written as a STEP file that declares the inch;
    returns the kernel's (volume in^3, cg in, inertia in^5)."""
    raw = str(path) + ".raw.step"
    figures = write_model(raw, lambda: add_blade(1000.0 / 25.4))[0]
    with open(raw, encoding="latin-1") as fh:
        text = inch_step(fh.read())
    with open(path, "w", encoding="latin-1") as fh:
        fh.write(text)
    os.remove(raw)
    return figures
