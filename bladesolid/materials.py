"""A small built-in table of common blade materials: nominal density and elastic constants.

Each value is a typical nominal value for the material class with its source named.
These are for convenience only: use the drawing's or the material certificate's value
for any decision. The elastic constants (Young's modulus E, Poisson's ratio ν) are those of
an isotropic solid, as the elastic blade uses them (docs/CONVENTIONS.md §10); for wood and
fibre laminates, which are not isotropic, they are a stated simplification (the modulus along
the span, where the centrifugal tension acts) and the ``elastic_source`` says so.
"""

from __future__ import annotations

from dataclasses import dataclass

from .errors import InputError


@dataclass(frozen=True)
class Material:
    """A named material: density in kg/m³, isotropic elastic constants (Young's modulus, Pa;
    Poisson's ratio) and where each value comes from."""

    name: str
    density_kg_m3: float
    description: str
    source: str
    modulus_Pa: float | None = None
    poisson: float | None = None
    elastic_source: str = ""


MATERIALS: dict[str, Material] = {
    m.name: m
    for m in [
        Material("al-2025-t6", 2810.0, "aluminium forging alloy 2025-T6 (classic propeller blade alloy)",
                 "MMPDS-style alloy data sheets, 0.101 lb/in^3 (from memory)",
                 71.0e9, 0.33, "MMPDS-style alloy data sheets, E 10.3 Msi, nu 0.33 (from memory)"),
        Material("al-2014-t6", 2800.0, "aluminium forging alloy 2014-T6",
                 "ASM Handbook Vol. 2, 2.80 g/cm^3 (from memory)",
                 72.4e9, 0.33, "ASM Handbook Vol. 2, E 72.4 GPa, nu 0.33 (from memory)"),
        Material("al-7075-t73", 2810.0, "aluminium forging alloy 7075-T73",
                 "ASM Handbook Vol. 2, 2.81 g/cm^3 (from memory)",
                 71.7e9, 0.33, "ASM Handbook Vol. 2, E 71.7 GPa, nu 0.33 (from memory)"),
        Material("steel-4340", 7850.0, "low-alloy steel 4340 (shanks, ferrules, retention parts)",
                 "ASM Handbook Vol. 1, 7.85 g/cm^3 (from memory)",
                 205.0e9, 0.29, "ASM Handbook Vol. 1, E 205 GPa, nu 0.29 (from memory)"),
        Material("stainless-17-4ph", 7800.0, "precipitation-hardening stainless 17-4PH (erosion sheaths)",
                 "ASM Handbook Vol. 1, 7.80 g/cm^3 (from memory)",
                 196.0e9, 0.27, "ASM Handbook Vol. 1, E 196 GPa, nu 0.27 (from memory)"),
        Material("ti-6al-4v", 4430.0, "titanium alloy Ti-6Al-4V (fan blades, sheaths)",
                 "ASM Handbook Vol. 2, 4.43 g/cm^3 (from memory)",
                 113.8e9, 0.342, "ASM Handbook Vol. 2, E 113.8 GPa, nu 0.342 (from memory)"),
        Material("nickel-200", 8890.0, "commercially pure nickel (electroformed erosion sheaths)",
                 "ASM Handbook Vol. 2, 8.89 g/cm^3 (from memory)",
                 204.0e9, 0.31, "ASM Handbook Vol. 2, E 204 GPa, nu 0.31 (from memory)"),
        Material("wood-laminated-birch", 700.0, "laminated birch, resin-impregnated (wooden blades)",
                 "USDA Wood Handbook FPL-GTR-190, birch ~0.62-0.70 g/cm^3 at 12% moisture; "
                 "resin-densified laminates run higher (from memory)",
                 15.0e9, 0.30, "USDA Wood Handbook FPL-GTR-190, yellow birch E_L ~13.9 GPa at 12% moisture, "
                 "densified laminates higher (from memory); wood is orthotropic: isotropic with the grain "
                 "modulus overestimates torsion and cross-grain stiffness; nu common practice, no source"),
        Material("gfrp-epoxy", 1900.0, "glass fibre / epoxy laminate, ~60% fibre by volume",
                 "rule of mixtures with E-glass 2.55 g/cm^3 and epoxy 1.2 g/cm^3 (from memory)",
                 25.0e9, 0.30, "quasi-isotropic E-glass/epoxy laminate, ~60% fibre, E ~20-28 GPa, nu ~0.3 "
                 "(from memory); an isotropic stand-in for an orthotropic laminate"),
        Material("cfrp-epoxy", 1560.0, "carbon fibre / epoxy laminate, ~60% fibre by volume",
                 "rule of mixtures with carbon fibre 1.78 g/cm^3 and epoxy 1.2 g/cm^3 (from memory)",
                 55.0e9, 0.31, "quasi-isotropic carbon/epoxy laminate, ~60% fibre, E ~50-60 GPa, nu ~0.3 "
                 "(from memory); an isotropic stand-in for an orthotropic laminate"),
        Material("pu-foam-core", 100.0, "rigid polyurethane foam core of composite blades",
                 "typical structural foam grades 0.05-0.2 g/cm^3 (from memory)",
                 0.08e9, 0.30, "rigid structural foam, E ~40-150 MPa at 0.1 g/cm^3 (from memory)"),
    ]
}


def material(name: str, source: str = "--material") -> Material:
    """Look a material up by name (case-insensitive).

    >>> material("AL-2025-T6").density_kg_m3
    2810.0
    >>> material("ti-6al-4v").modulus_Pa, material("ti-6al-4v").poisson
    (113800000000.0, 0.342)
    """
    key = str(name).strip().lower()
    if key not in MATERIALS:
        raise InputError(source, f"unknown material {name!r}; known: {', '.join(MATERIALS)}")
    return MATERIALS[key]
