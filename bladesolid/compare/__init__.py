"""Repaired and re-profiled blades against their reference, and matched blade sets.

One module per stage, each a few small functions over numpy arrays (SI inside, metres):

* :mod:`.transforms` — rigid (4, 4) matrices and the transform files users give;
* :mod:`.query` — exact closest points and signed distances to a closed surface, seeded samples;
* :mod:`.registration` — a rigid motion that puts a repaired blade (often a 3D scan in the
  scanner's own frame) onto its reference: principal-axes starts, then a trimmed ICP so that
  material removed by the repair does not pull the fit (:func:`register`);
* :mod:`.deviation` — signed deviation per repaired vertex and the removed and added volumes;
* :mod:`.limits` — the user's allowed deltas, from their approved repair data, in a small TOML
  file (:data:`EXAMPLE_LIMITS`); the tool has no limits of its own;
* :mod:`.comparison` — the deltas, repaired minus reference, of the mass figures and of the
  loads at one operating point, both blades in the reference's hub frame, and the verdict
  (:func:`compare_blade`);
* :mod:`.matching` — which blade of a set goes to which hub position for the smallest
  resultant static imbalance, the CTMs kept balanced second (:func:`match_blades`).

Every public name of these modules is importable from ``bladesolid.compare`` itself.
"""

from .comparison import BladeFigures, Comparison, Delta, blade_figures, compare_blade, comparison_section
from .deviation import Deviation, boolean_volumes, signed_deviation, solid
from .limits import (
    EXAMPLE_LIMITS,
    LIMIT_KEYS,
    LIMITS_NOTE,
    MAGNITUDE_LIMITS,
    SIGNED_LIMITS,
    TEXT_LIMIT_KEYS,
    Limit,
    LimitCheck,
    Limits,
    check_limits,
    limit_value_text,
    parse_limits,
    read_limits,
)
from .matching import (
    REPORT_SCHEMA,
    Assignment,
    MatchResult,
    SetBlade,
    match_blades,
    match_section,
    match_set,
    read_set_report,
    set_blade_from_report,
)
from .query import SurfaceQuery, merge_surfaces, sample_surface
from .registration import (
    AXIS_FLIPS,
    Registration,
    given_registration,
    initial_transforms,
    kabsch,
    point_to_plane_step,
    principal_frame,
    register,
)
from .transforms import apply_transform, check_rigid, invert_rigid, read_transform, rigid_matrix, rotation_angle_deg

__all__ = [
    # transforms
    "apply_transform", "check_rigid", "invert_rigid", "read_transform", "rigid_matrix", "rotation_angle_deg",
    # closest points and samples
    "SurfaceQuery", "merge_surfaces", "sample_surface",
    # registration
    "AXIS_FLIPS", "Registration", "given_registration", "initial_transforms", "kabsch", "point_to_plane_step",
    "principal_frame", "register",
    # deviation and volumes
    "Deviation", "boolean_volumes", "signed_deviation", "solid",
    # limits
    "EXAMPLE_LIMITS", "LIMITS_NOTE", "LIMIT_KEYS", "MAGNITUDE_LIMITS", "SIGNED_LIMITS", "TEXT_LIMIT_KEYS", "Limit",
    "LimitCheck", "Limits", "check_limits", "limit_value_text", "parse_limits", "read_limits",
    # the comparison
    "BladeFigures", "Comparison", "Delta", "blade_figures", "compare_blade", "comparison_section",
    # blade-set matching
    "REPORT_SCHEMA", "Assignment", "MatchResult", "SetBlade", "match_blades", "match_section", "match_set",
    "read_set_report", "set_blade_from_report",
]
