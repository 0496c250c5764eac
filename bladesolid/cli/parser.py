"""The sub-commands of ``bladesolid`` and their flags (docs/CONVENTIONS.md §7).

Flags shared by several commands are added by one function each (the blade, the loads, the
mass elements); every flag of a job key has the key's name (``--pitch-axis`` ↔ ``pitch_axis``).
"""

from __future__ import annotations

import argparse

from .. import CAUTION, __version__
from ..cad import DEFAULT_CAD_TOLERANCE
from . import commands
from .options import UsageError

__all__ = ["build_parser", "join_signed_values"]


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line, exit 2, no usage dump
        raise UsageError(f"{self.prog}: {message}")


class _Tagged(argparse.Action):
    """Append ("density"|"material", value) to one list so their order is kept."""

    def __call__(self, parser, namespace, values, option_string=None):
        items = getattr(namespace, "densities", None) or []
        kind = "material" if option_string == "--material" else "density"
        items.append((kind, values))
        namespace.densities = items


def _add_blade_flags(p, job_allowed: bool = True, positional: bool = True, json_flag: bool = True):
    if positional:
        p.add_argument("input", metavar="JOB.toml|MESH" if job_allowed else "MESH",
                       help="a job file (.toml), a blade mesh (STL/OBJ/PLY/OFF, .msh/.vtu/.inp) or a CAD file "
                            "(STEP/IGES/BREP)")
    p.add_argument("--units", help="length unit of the mesh: mm, cm, m, in or ft (required for a mesh and BREP; "
                                   "STEP and IGES declare theirs, which a unit given must match)")
    p.add_argument("--cad-tolerance", type=float, metavar="F",
                   help="chord tolerance of a CAD file's triangulation, a fraction of the model's diagonal "
                        f"(default {DEFAULT_CAD_TOLERANCE:g})")
    p.add_argument("--density", action=_Tagged, dest="densities", metavar="QUANTITY",
                   help='density with its unit, e.g. "2810 kg/m^3" (bare number: kg/m^3); once, or once per body')
    p.add_argument("--material", action=_Tagged, dest="densities", metavar="NAME",
                   help="a material of the built-in table (see `bladesolid materials`)")
    p.add_argument("--lumped-mass", action="append", metavar="MASS@X,Y,Z",
                   help='a point mass fixed to the blade, e.g. "0.05 kg@-10,160,30" (model frame and unit)')
    p.add_argument("--hub-centre", metavar="X,Y,Z")
    p.add_argument("--thrust-axis", metavar="X,Y,Z")
    p.add_argument("--pitch-axis", metavar="X,Y,Z")
    p.add_argument("--pitch-point", metavar="X,Y,Z")
    p.add_argument("--precone", type=float, metavar="DEG")
    p.add_argument("--rotation", choices=["right", "left"])
    p.add_argument("--blades", type=int, metavar="N", help="number of blades on the hub")
    p.add_argument("--reference-radius", type=float, metavar="R", help="reference station radius (model unit)")
    p.add_argument("--reference-fraction", type=float, metavar="F", help="reference station as a fraction of the tip radius (default 0.75)")
    p.add_argument("--angle-line", choices=["chord", "face"],
                   help="reference line of the blade angle: the nose-to-tail chord (default) or the flat face")
    p.add_argument("--name", help="blade name shown in the reports")
    p.add_argument("--weld", type=float, metavar="TOL",
                   help="weld vertices closer than TOL (mesh unit), always (default: 1e-6 of the model size, only "
                        "when the surface is open as read)")
    p.add_argument("--repair", action="store_const", const=True, default=None,
                   help="mend a damaged surface (holes, folded caps, duplicate faces, overlapping parts of one "
                        "material); every change is reported, the mended surface written beside the outputs")
    p.add_argument("--repair-limit", type=float, metavar="PCT",
                   help="largest volume change a repair may make, percent of the volume (default 1)")
    if json_flag:
        p.add_argument("--json", metavar="FILE", help="write the JSON report here")
    p.add_argument("--force", action="store_true", help="overwrite existing output files")
    p.add_argument("--us", action="store_true", help="print US customary units (the JSON stays SI)")


def _add_load_flags(p):
    p.add_argument("--rpm", metavar="N[,N...]", help="speed(s), rpm")
    g = p.add_mutually_exclusive_group()
    g.add_argument("--blade-angle", type=float, metavar="DEG", help="absolute blade angle, degrees")
    g.add_argument("--pitch-change", type=float, metavar="DEG", help="change from the modelled blade angle, degrees")
    p.add_argument("--sweep", metavar="FROM:TO:STEP", help="blade-angle sweep, degrees")


def _add_element_flags(p):
    p.add_argument("--elements", type=int, metavar="N", help="target number of tetrahedral mass elements (finer fields)")
    p.add_argument("--element-size", type=float, metavar="L", help="largest element edge, model unit (finer fields)")
    p.add_argument("--field-faces", type=int, metavar="N",
                   help="simplify surfaces above N faces for the element fields (mass and loads stay exact)")


def build_parser() -> argparse.ArgumentParser:
    p = _Parser(prog="bladesolid", description="Mass properties and centrifugal loads of rotating blades.",
                epilog=CAUTION)
    p.add_argument("--version", action="version", version=f"bladesolid {__version__}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)

    m = sub.add_parser("mass", help="mass, CG, inertia tensors, static moment")
    _add_blade_flags(m)
    m.add_argument("--check-elements", action="store_true",
                   help="also build the tetrahedral mass elements and check them against the surface")
    m.set_defaults(func=commands.cmd_mass)

    lo = sub.add_parser("loads", help="centrifugal loads and CTM at speed and blade angle")
    _add_blade_flags(lo)
    _add_load_flags(lo)
    lo.add_argument("--rpm-sweep", metavar="FROM:TO:STEP", help="speed sweep at the first operating point's blade angle, rpm")
    lo.add_argument("--csv", metavar="FILE", help="write the blade-angle sweep (CTM, pitch stiffness) as CSV")
    lo.add_argument("--plot", metavar="FILE.png", help="plot CTM and pitch stiffness over blade angle (operating angle marked)")
    lo.add_argument("--rpm-csv", metavar="FILE", help="write the speed sweep as CSV")
    lo.add_argument("--rpm-plot", metavar="FILE.png", help="plot CTM and radial pull over speed")
    lo.add_argument("--proof-factor", type=float, metavar="F", help="centrifugal proof load factor (default 2)")
    lo.add_argument("--rated-rpm", type=float, metavar="N",
                    help="maximum rated speed, the basis of the proof load (default: the highest operating point)")
    lo.set_defaults(func=commands.cmd_loads)

    sp = sub.add_parser("span", help="spanwise cuts: section properties, centrifugal tension, stress and CTM")
    _add_blade_flags(sp)
    _add_load_flags(sp)
    sp.add_argument("--stations", metavar="N|R1,R2,...", help="station count, or radii along the pitch axis (model unit)")
    sp.add_argument("--allowable", metavar="QUANTITY", help='material allowable stress, e.g. "240 MPa" (centrifugal margin of safety)')
    sp.add_argument("--csv", metavar="FILE", help="write the spanwise table as CSV")
    sp.add_argument("--plot", metavar="FILE.png", help="plot stress, tension, CTM and area against radius")
    _add_element_flags(sp)
    sp.set_defaults(func=commands.cmd_span)

    cp = sub.add_parser("compare", help="a repaired blade against its reference: registration, deviation, deltas, limits")
    _add_blade_flags(cp)
    _add_load_flags(cp)
    cp.add_argument("--reference", metavar="MESH", help="the reference (nominal) blade mesh; the hub-frame flags refer to it")
    cp.add_argument("--reference-units", metavar="U", help="length unit of the reference mesh (default: --units)")
    cp.add_argument("--limits", metavar="FILE", help="your allowed changes (TOML), from the approved repair data")
    cp.add_argument("--transform", metavar="FILE|identity",
                    help="rigid transform repaired -> reference frame (4x4 in JSON/TOML/text, translation in m unless "
                         "the file states units), or 'identity'; default: register automatically")
    cp.add_argument("--deviation-png", metavar="FILE.png", help="render the signed surface deviation")
    cp.set_defaults(func=commands.cmd_compare)

    ma = sub.add_parser("match", help="assign the blades of a set to hub positions for the smallest static imbalance")
    ma.add_argument("reports", nargs="+", metavar="REPORT.json", help="bladesolid JSON reports (loads or check), one per blade")
    ma.add_argument("--rpm", type=float, metavar="N", help="speed for the imbalance force (default: the reports' rpm)")
    ma.add_argument("--json", metavar="FILE", help="write the JSON report here")
    ma.add_argument("--plot", metavar="FILE.png", help="draw the hub with the best and the worst assignment")
    ma.add_argument("--force", action="store_true", help="overwrite existing output files")
    ma.add_argument("--us", action="store_true", help="print US customary units (the JSON stays SI)")
    ma.set_defaults(func=commands.cmd_match)

    ck = sub.add_parser("check", help="the whole review of a job: JSON, CSV, plots, renders, VTU and HTML in one folder")
    ck.add_argument("job", metavar="JOB.toml")
    ck.add_argument("--out", required=True, metavar="DIR", help="output folder (created; refused if not empty without --force)")
    _add_blade_flags(ck, positional=False, json_flag=False)
    _add_load_flags(ck)
    ck.add_argument("--rpm-sweep", metavar="FROM:TO:STEP", help="speed sweep, rpm")
    ck.add_argument("--stations", metavar="N|R1,R2,...", help="spanwise stations: a count or radii (model unit)")
    ck.add_argument("--allowable", metavar="QUANTITY", help='material allowable stress, e.g. "240 MPa"')
    ck.add_argument("--proof-factor", type=float, metavar="F", help="centrifugal proof load factor (default 2)")
    ck.add_argument("--rated-rpm", type=float, metavar="N",
                    help="maximum rated speed, the basis of the proof load (default: the highest operating point)")
    ck.add_argument("--reference", metavar="MESH", help="the nominal blade to compare this one with")
    ck.add_argument("--limits", metavar="FILE", help="limits file (TOML) for the comparison")
    _add_element_flags(ck)
    ck.set_defaults(func=commands.cmd_check)

    dm = sub.add_parser("demo", help="write the demo blade and job into DIR and run check on it")
    dm.add_argument("dir", nargs="?", default="bladesolid-demo", metavar="DIR")
    dm.add_argument("--force", action="store_true", help="write into an existing, non-empty folder")
    dm.add_argument("--us", action="store_true", help="print US customary units (files stay SI)")
    dm.set_defaults(func=commands.cmd_demo)

    bt = sub.add_parser("batch", help="many job files in parallel (this machine or a dask cluster), one summary")
    bt.add_argument("inputs", nargs="+", metavar="JOBS",
                    help="folders of job files (*.toml), job files, or text files listing job files (one per line)")
    bt.add_argument("--out", required=True, metavar="DIR",
                    help="results folder: DIR/<job>/report.json (or the check folder), DIR/summary.csv and .json")
    bt.add_argument("--command", choices=["mass", "loads", "check"], default="loads",
                    help="the analysis run for every job (default: loads)")
    bt.add_argument("--scheduler", metavar="ADDRESS",
                    help="a running dask scheduler, e.g. tcp://host:8786 (default: worker processes on this machine)")
    bt.add_argument("--workers", type=int, metavar="N",
                    help="worker processes on this machine (default: one per CPU; 0 = one job after another here)")
    bt.add_argument("--force", action="store_true", help="replace existing results and summaries")
    bt.set_defaults(func=commands.cmd_batch)

    vw = sub.add_parser("view", help="an interactive 3-D window of a per-element field (needs a display)")
    _add_blade_flags(vw)
    _add_load_flags(vw)
    vw.add_argument("--field", default="ctm_Nm",
                    choices=["ctm_Nm", "radial_pull_N", "mass_kg", "ctm_share_band", "pull_share_band", "region"])
    vw.add_argument("--view", default="iso", choices=["planform", "tip", "iso", "aft"])
    _add_element_flags(vw)
    vw.set_defaults(func=commands.cmd_view)

    mt = sub.add_parser("materials", help="list the built-in materials")
    mt.set_defaults(func=commands.cmd_materials)
    for command in sub.choices.values():
        command.add_argument("--verbose", action="store_true",
                             help="show every stage and warning as it happens (and the traceback of an internal error)")
    return p


#: flags whose value may start with a minus sign ("--sweep -10:90:1", "--pitch-axis -1,0,0")
_SIGNED_FLAGS = {"--sweep", "--rpm-sweep", "--blade-angle", "--pitch-change", "--precone", "--hub-centre",
                 "--thrust-axis", "--pitch-axis", "--pitch-point"}


def join_signed_values(argv: list[str]) -> list[str]:
    """Write ``--flag -value`` as ``--flag=-value`` so that a negative value is not taken for an option.

    >>> join_signed_values(["loads", "--sweep", "-10:90:1", "--force"])
    ['loads', '--sweep=-10:90:1', '--force']
    """
    out, i = [], 0
    while i < len(argv):
        a = argv[i]
        if a in _SIGNED_FLAGS and i + 1 < len(argv) and len(argv[i + 1]) > 1 and argv[i + 1][0] == "-" \
                and (argv[i + 1][1].isdigit() or argv[i + 1][1] == "."):
            out.append(f"{a}={argv[i + 1]}")
            i += 2
            continue
        out.append(a)
        i += 1
    return out
