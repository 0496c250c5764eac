"""Per-element fields: where the mass, the radial pull and the CTM of the solid come from.

Every element's contribution is computed with the *same* formulas as the blade totals
(:mod:`bladesolid.loads` broadcasts over :class:`~bladesolid.moments.ElementMoments`): the
element moments are moved to the chosen blade angle by the rigid pitch motion
(:func:`~bladesolid.loads.moments_at_angle`) and :func:`~bladesolid.loads.radial_pull` and
:func:`~bladesolid.loads.centrifugal_twisting_moment` are applied to them. All three are
linear in the moments, so the element fields add up to the totals of the solid to round-off.
Lumped masses are not elements; they are reported as rows of their own.

Two ways to read the fields:

* **share bands** — the fewest elements that carry 50 %, 80 % and 95 % of a total
  (elements sorted by their contribution in the sense of the total, largest first);
* **hot spots** — the share of mass, radial pull and CTM carried by five regions: shank/root,
  leading-edge band, mid-chord body, trailing-edge band and tip.

Everything is SI and in the hub frame of docs/CONVENTIONS.md §1.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .frame import HubFrame, chord_line, section_points
from .loads import centrifugal_twisting_moment, moments_at_angle, radial_pull
from .geometry import tet_signed_volumes
from .moments import ElementMoments, point_mass
from .units import rpm_to_rad_s

__all__ = ["CIRCULAR_RATIO", "EDGE_FRACTION", "FIELD_NAMES", "LEADING_EDGE", "MID_CHORD", "REGIONS", "ROOT_FRACTION",
           "SHANK", "SHARE_LEVELS", "TIP", "TIP_FRACTION", "TRAILING_EDGE", "TRANSITION_RATIO",
           "element_contributions", "element_fields", "ElementFields", "FieldTotals", "hot_spots", "HotSpots",
           "LumpedRow", "share_bands", "ShareBands", "summary"]

#: Levels of the cumulative share bands, percent of the total.
SHARE_LEVELS = (50, 80, 95)

#: Hot-spot regions, in the order of the region codes stored per element.
REGIONS = ("shank/root", "leading edge", "mid-chord", "trailing edge", "tip")
SHANK, LEADING_EDGE, MID_CHORD, TRAILING_EDGE, TIP = range(len(REGIONS))

#: Chordwise width of the leading- and trailing-edge bands, fraction of the local chord.
EDGE_FRACTION = 0.15
#: Outboard part of the span counted as the tip.
TIP_FRACTION = 0.10
#: Inboard part of the span counted as shank/root when no circular shank is found.
ROOT_FRACTION = 0.25
#: Thickness/chord at or above which a section counts as near-circular (a circle gives 1).
CIRCULAR_RATIO = 0.8
#: Thickness/chord below which the root transition is over (midway between a circle and a
#: thick root airfoil section; common practice, no source).
TRANSITION_RATIO = 0.5


# --- contributions -----------------------------------------------------------------------


def element_contributions(elements: ElementMoments, frame: HubFrame, delta_deg: float, omega: float):
    """Per-element radial pull (N) and CTM (N·m, + toward coarse) after a pitch change.

    elements : moments at the modelled position (hub frame); delta_deg : pitch change from
    the modelled blade angle toward coarse; omega : rad/s.
    Returns ``(moved, pull (k,), ctm (k,))`` with ``moved`` the element moments at the new angle.

    >>> from bladesolid.frame import hub_frame
    >>> el = ElementMoments(np.array([1.0]), np.array([[0.0, 1.0, 0.0]]), np.array([np.diag([0, 1.0, 0])]))
    >>> _, pull, ctm = element_contributions(el, hub_frame(), 30.0, 10.0)
    >>> float(pull[0]), float(ctm[0])  # m Ω² r on the pitch axis, no twisting moment
    (100.0, 0.0)
    """
    moved = moments_at_angle(elements, frame, delta_deg)
    return moved, np.asarray(radial_pull(moved, frame, omega)), np.asarray(centrifugal_twisting_moment(moved, frame, omega))


@dataclass(frozen=True)
class FieldTotals:
    """Totals by the same formulas: mass (kg), radial pull (N), CTM (N·m, + toward coarse)."""

    mass_kg: float
    radial_pull_N: float
    ctm_Nm: float

    def __add__(self, other: "FieldTotals") -> "FieldTotals":
        return FieldTotals(self.mass_kg + other.mass_kg, self.radial_pull_N + other.radial_pull_N,
                           self.ctm_Nm + other.ctm_Nm)


@dataclass(frozen=True)
class LumpedRow:
    """A lumped mass fixed to the blade at the chosen blade angle and speed (not an element)."""

    name: str
    mass_kg: float
    radial_pull_N: float
    ctm_Nm: float


# --- cumulative share bands ----------------------------------------------------------------


@dataclass(frozen=True)
class ShareBands:
    """The fewest elements that carry given shares of a total.

    quantity : field name (``"ctm_Nm"`` or ``"radial_pull_N"``)
    total : the total being shared (sum of all contributions)
    sense : +1 or −1, the sign of the total; contributions are ranked by ``sense × value``
    levels : (L,) percent levels, ascending (default 50, 80, 95)
    band : (k,) int per element: the smallest level whose set holds the element, else 100
    counts, volumes_m3, masses_kg : (L,) size of each nested set
    carried_pct : (L,) share of the total each set really carries, percent (≥ its level)
    element_pct, volume_pct : (L,) the set's share of the element count and of the volume
    opposing_pct : what the elements that act against the total add up to, percent of |total|
      (0 for the radial pull of an ordinary blade; often large for the CTM, whose leading-
      and trailing-edge material pulls toward fine while thick material near the pitch axis
      pulls toward coarse)
    """

    quantity: str
    total: float
    sense: int
    levels: tuple[int, ...]
    band: np.ndarray
    counts: tuple[int, ...]
    volumes_m3: tuple[float, ...]
    masses_kg: tuple[float, ...]
    carried_pct: tuple[float, ...]
    element_pct: tuple[float, ...]
    volume_pct: tuple[float, ...]
    opposing_pct: float

    def rows(self) -> list[dict]:
        """One row per level, for tables (JSON/CSV)."""
        return [
            {"quantity": self.quantity, "level_pct": lvl, "elements": n, "element_pct": ep,
             "volume_m3": v, "volume_pct": vp, "mass_kg": m, "carried_pct": c}
            for lvl, n, ep, v, vp, m, c in zip(self.levels, self.counts, self.element_pct, self.volumes_m3,
                                               self.volume_pct, self.masses_kg, self.carried_pct)
        ]


def share_bands(values: np.ndarray, volume: np.ndarray, mass: np.ndarray, levels=SHARE_LEVELS,
                quantity: str = "") -> ShareBands:
    """Cumulative share bands of per-element contributions ``values`` (k,).

    Elements are sorted by their contribution in the sense of the total, largest first, and
    cumulated; the set for level L is the shortest prefix whose sum reaches L % of the
    total. A total of exactly zero has no shares: every element gets band 100 and the sets
    are empty.

    >>> b = share_bands(np.array([1.0, 6.0, -1.0, 4.0]), np.ones(4), np.ones(4))
    >>> b.band.tolist(), b.counts, b.carried_pct
    ([100, 50, 100, 80], (1, 2, 2), (60.0, 100.0, 100.0))
    """
    values = np.asarray(values, dtype=float)
    volume = np.asarray(volume, dtype=float)
    mass = np.asarray(mass, dtype=float)
    levels = tuple(sorted(int(x) for x in levels))
    if any(not 0 < x < 100 for x in levels):
        raise ValueError(f"share levels must lie strictly between 0 and 100 percent, got {levels}")
    total = float(values.sum())
    sense = -1 if total < 0 else 1
    k = values.shape[0]
    band = np.full(k, 100, dtype=np.int32)
    if total == 0.0 or k == 0:
        zeros = tuple(0 for _ in levels)
        fz = tuple(0.0 for _ in levels)
        return ShareBands(quantity, total, sense, levels, band, zeros, fz, fz, fz, fz, fz, 0.0)
    ranked = sense * values
    order = np.argsort(-ranked, kind="stable")
    cum = np.cumsum(ranked[order]) / abs(total)
    counts, vols, masses, carried = [], [], [], []
    for lvl in reversed(levels):  # widest set first, narrower sets overwrite
        n = int(np.flatnonzero(cum >= lvl / 100.0)[0]) + 1  # cum rises, then falls
        band[order[:n]] = lvl
    for lvl in levels:
        n = int(np.count_nonzero(band <= lvl))
        sel = order[:n]
        counts.append(n)
        vols.append(float(volume[sel].sum()))
        masses.append(float(mass[sel].sum()))
        carried.append(100.0 * float(cum[n - 1]))
    opposing = 100.0 * float(-ranked[ranked < 0].sum()) / abs(total)
    vtot = float(volume.sum())
    return ShareBands(
        quantity, total, sense, levels, band, tuple(counts), tuple(vols), tuple(masses), tuple(carried),
        tuple(100.0 * n / k for n in counts), tuple(100.0 * v / vtot if vtot else 0.0 for v in vols), opposing,
    )


# --- the per-element fields ------------------------------------------------------------------


@dataclass(frozen=True)
class ElementFields:
    """Per-element fields of the solid at one speed and blade angle (hub frame, SI).

    rpm, omega_rad_s : speed;  blade_angle_deg, modelled_deg : chosen and modelled blade angle
    mass_kg, volume_m3, radial_pull_N, ctm_Nm : (k,) per element; CTM + toward coarse
    centroid_m : (k, 3) element centroids at the chosen blade angle, hub frame, m
    modelled_centroid_m : (k, 3) the same at the modelled blade angle
    body : (k,) int, index of the body of each element
    ctm_share_band, pull_share_band : (k,) int, 50/80/95/100 (see :class:`ShareBands`)
    ctm_shares, pull_shares : the share bands with their set sizes
    totals : totals of the solid by the same formulas (the fields add up to these)
    lumped : one row per lumped mass (not elements; not in the fields or ``totals``)
    """

    rpm: float
    omega_rad_s: float
    blade_angle_deg: float
    modelled_deg: float
    mass_kg: np.ndarray
    volume_m3: np.ndarray
    radial_pull_N: np.ndarray
    ctm_Nm: np.ndarray
    centroid_m: np.ndarray
    modelled_centroid_m: np.ndarray
    body: np.ndarray
    ctm_share_band: np.ndarray
    pull_share_band: np.ndarray
    ctm_shares: ShareBands
    pull_shares: ShareBands
    totals: FieldTotals
    lumped: tuple[LumpedRow, ...] = ()

    def __len__(self) -> int:
        return int(self.mass_kg.shape[0])

    @property
    def total_with_lumped(self) -> FieldTotals:
        """Solid plus lumped masses: the blade figures of :func:`bladesolid.api.loads_at`."""
        out = self.totals
        for row in self.lumped:
            out = out + FieldTotals(row.mass_kg, row.radial_pull_N, row.ctm_Nm)
        return out

    def field(self, name: str) -> np.ndarray:
        """A per-element field by name (``mass_kg``, ``radial_pull_N``, ``ctm_Nm``, ...)."""
        if name not in FIELD_NAMES:
            raise ValueError(f"unknown element field {name!r}; expected one of {', '.join(FIELD_NAMES)}")
        return np.asarray(getattr(self, name))

    def per_volume(self, name: str) -> np.ndarray:
        """A contribution field divided by the element volume: per m³ (kg/m³, N/m³, N·m/m³)."""
        return self.field(name) / self.volume_m3

    def share_rows(self) -> list[dict]:
        """The share-band table of both the CTM and the radial pull."""
        return self.ctm_shares.rows() + self.pull_shares.rows()

    def lumped_rows(self) -> list[dict]:
        return [{"name": r.name, "mass_kg": r.mass_kg, "radial_pull_N": r.radial_pull_N, "ctm_Nm": r.ctm_Nm}
                for r in self.lumped]


#: Names accepted by :meth:`ElementFields.field`.
FIELD_NAMES = ("mass_kg", "volume_m3", "radial_pull_N", "ctm_Nm", "ctm_share_band", "pull_share_band", "body")


def _element_volumes(nodes: np.ndarray, tets: np.ndarray) -> np.ndarray:
    """(k,) element volumes |((v1−v0)×(v2−v0))·(v3−v0)|/6, m³.

    >>> float(_element_volumes(np.array([[0., 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]]), np.array([[0, 1, 2, 3]]))[0]) * 6
    1.0
    """
    return np.abs(tet_signed_volumes(np.asarray(nodes, dtype=float), np.asarray(tets)))


def element_fields(blade, rpm: float, blade_angle_deg: float | None = None, *,
                   pitch_change_deg: float | None = None, levels=SHARE_LEVELS) -> ElementFields:
    """Per-element mass, radial pull and CTM of a meshed blade at ``rpm`` and a blade angle.

    blade : a :class:`bladesolid.api.Blade` with elements (``elements``, ``element_nodes``,
      ``element_tets``, ``element_body``, ``frame``, ``modelled_deg``, ``lumped``)
    blade_angle_deg / pitch_change_deg : as :func:`bladesolid.api.resolve_blade_angle`
      (default: the modelled blade angle)
    levels : percent levels of the share bands
    """
    if blade.elements is None:
        raise ValueError(f"{blade.source}: the blade was loaded without mass elements; load it with elements=True")
    from .api import resolve_blade_angle  # the semantics of the documented API, written once

    frame = blade.frame
    modelled = float(blade.modelled_deg)
    beta = resolve_blade_angle(blade, blade_angle_deg, pitch_change_deg)
    delta = beta - modelled
    omega = rpm_to_rad_s(rpm)
    el = blade.elements
    moved, pull, ctm = element_contributions(el, frame, delta, omega)
    total = moments_at_angle(el.total(), frame, delta)
    totals = FieldTotals(float(total.mass), float(radial_pull(total, frame, omega)),
                         float(centrifugal_twisting_moment(total, frame, omega)))
    volume = _element_volumes(blade.element_nodes, blade.element_tets)
    mass = np.asarray(el.mass, dtype=float)
    ctm_b = share_bands(ctm, volume, mass, levels, "ctm_Nm")
    pull_b = share_bands(pull, volume, mass, levels, "radial_pull_N")
    lumped = []
    for p in getattr(blade, "lumped", ()):
        pm = moments_at_angle(point_mass(p.mass_kg, frame.to_hub(p.position_m)), frame, delta)
        lumped.append(LumpedRow(p.name, float(p.mass_kg), float(radial_pull(pm, frame, omega)),
                                float(centrifugal_twisting_moment(pm, frame, omega))))
    body = blade.element_body if blade.element_body is not None else np.zeros(len(el), dtype=np.int32)
    return ElementFields(
        rpm=float(rpm),
        omega_rad_s=omega,
        blade_angle_deg=beta,
        modelled_deg=modelled,
        mass_kg=mass,
        volume_m3=volume,
        radial_pull_N=pull,
        ctm_Nm=ctm,
        centroid_m=moved.first / mass[:, None],
        modelled_centroid_m=el.first / mass[:, None],
        body=np.asarray(body),
        ctm_share_band=ctm_b.band,
        pull_share_band=pull_b.band,
        ctm_shares=ctm_b,
        pull_shares=pull_b,
        totals=totals,
        lumped=tuple(lumped),
    )


# --- sections along the span ----------------------------------------------------------------


@dataclass(frozen=True)
class _SectionTrack:
    """Leading and trailing edges of sections normal to e along the span (hub frame, modelled).

    radii_m : (n,) station radii (y), ascending
    leading_edge_m, trailing_edge_m : (n, 3) chord-line ends of each section (docs/CONVENTIONS.md §2)
    chord_m : (n,) chord length;  thickness_ratio : (n,) section width normal to the chord / chord
    """

    radii_m: np.ndarray
    leading_edge_m: np.ndarray
    trailing_edge_m: np.ndarray
    chord_m: np.ndarray
    thickness_ratio: np.ndarray

    def edges_at(self, radius) -> tuple[np.ndarray, np.ndarray]:
        """(LE, TE) (..., 3) at ``radius`` (...), linear between stations, held at the ends."""
        r = np.asarray(radius, dtype=float)
        le = np.stack([np.interp(r, self.radii_m, self.leading_edge_m[:, j]) for j in range(3)], axis=-1)
        te = np.stack([np.interp(r, self.radii_m, self.trailing_edge_m[:, j]) for j in range(3)], axis=-1)
        return le, te


def _section_track(surfaces, frame: HubFrame, stations: int = 60) -> _SectionTrack:
    """Cut the surfaces (hub frame, modelled position) at ``stations`` radii spread evenly
    over the span (mid-points of equal intervals) and find each section's chord line."""
    y = np.concatenate([np.asarray(v)[:, 1] for v, _ in surfaces])
    lo, hi = float(y.min()), float(y.max())
    radii, les, tes, chords, ratios = [], [], [], [], []
    for r in lo + (np.arange(stations) + 0.5) / stations * (hi - lo):
        pts = section_points(surfaces, float(r))
        if len(pts) < 3:
            continue
        le, te = chord_line(pts, frame)
        c = le - te
        c[1] = 0.0
        chord = float(np.linalg.norm(c))
        if chord == 0.0:
            continue
        n = np.cross(frame.e, c / chord)
        w = pts @ n
        radii.append(float(r))
        les.append(le)
        tes.append(te)
        chords.append(chord)
        ratios.append(float(w.max() - w.min()) / chord)
    if len(radii) < 2:
        raise ValueError("fewer than two sections of the blade could be cut normal to the pitch axis")
    return _SectionTrack(np.array(radii), np.array(les), np.array(tes), np.array(chords), np.array(ratios))


def _chordwise_position(points: np.ndarray, track: _SectionTrack) -> np.ndarray:
    """(k,) chordwise position of points (k, 3) (hub frame, modelled position): 0 at the
    trailing edge, 1 at the leading edge of the section at the point's radius, measured
    along the chord line in the plane normal to e.

    The pitch motion is a rotation about an axis normal to these planes, so the position is
    the same at every blade angle.
    """
    p = np.asarray(points, dtype=float)
    le, te = track.edges_at(p[:, 1])
    c = le - te
    c[:, 1] = 0.0
    d = p - te
    d[:, 1] = 0.0
    return np.einsum("ij,ij->i", d, c) / np.einsum("ij,ij->i", c, c)


def _root_boundary(track: _SectionTrack, root_m: float, tip_m: float,
                  root_fraction: float = ROOT_FRACTION) -> tuple[float, str]:
    """Radius (m) inboard of which the blade counts as shank/root, and the rule used.

    When the innermost section is near-circular (thickness/chord ≥ ``CIRCULAR_RATIO``), the
    boundary is where the thickness ratio, going outboard, first falls below
    ``TRANSITION_RATIO`` (the middle of the circle-to-airfoil transition, interpolated
    between stations). Otherwise (no round shank, e.g. a plate) it is the inner
    ``root_fraction`` of the span.
    """
    t = track.thickness_ratio
    r = root_m + root_fraction * (tip_m - root_m)
    if t[0] < CIRCULAR_RATIO:
        return float(r), f"no circular shank found: inner {100 * root_fraction:g} % of the span"
    below = np.nonzero(t < TRANSITION_RATIO)[0]
    if len(below) == 0:
        return float(r), f"the sections never leave the near-circular shape: inner {100 * root_fraction:g} % of the span"
    i = int(below[0])
    r0, r1, t0, t1 = track.radii_m[i - 1], track.radii_m[i], t[i - 1], t[i]
    r = r0 + (t0 - TRANSITION_RATIO) / (t0 - t1) * (r1 - r0)
    return float(r), f"end of the circular shank: thickness/chord falls below {TRANSITION_RATIO:g} at r = {r:.4g} m"


# --- hot spots ---------------------------------------------------------------------------------


@dataclass(frozen=True)
class HotSpots:
    """Shares of the solid's mass, radial pull and CTM carried by each region.

    names : region names (index = region code);  region : (k,) int8 region code per element
    chordwise : (k,) chordwise position per element (0 trailing edge, 1 leading edge)
    table : one row per region: ``region, elements, volume_m3, volume_pct, mass_kg, mass_pct,
      radial_pull_N, radial_pull_pct, ctm_Nm, ctm_pct, ctm_per_volume_ratio`` (percent of the
      solid's totals, signed: a region that acts against the total has a negative share; each
      share column sums to 100; the ratio is ctm_pct / volume_pct, > 1 where the CTM is
      concentrated)
    root_m, tip_m : innermost and outermost radius of the solid
    root_boundary_m, root_rule : shank/root limit and how it was found
    tip_boundary_m : tip region limit;  edge_fraction : chordwise width of the edge bands
    rpm, blade_angle_deg : operating point of the fields
    """

    names: tuple[str, ...]
    region: np.ndarray
    chordwise: np.ndarray
    table: tuple[dict, ...]
    root_m: float
    tip_m: float
    root_boundary_m: float
    root_rule: str
    tip_boundary_m: float
    edge_fraction: float
    rpm: float
    blade_angle_deg: float

    def share_pct(self, column: str) -> np.ndarray:
        """(regions,) one share column of the table, percent (e.g. ``"ctm_pct"``)."""
        return np.array([row[column] for row in self.table])

    def definitions(self) -> dict[str, str]:
        """How each region is defined, in words (for reports)."""
        e = f"{100 * self.edge_fraction:g} %"
        return {
            "shank/root": f"inboard of r = {self.root_boundary_m:.4g} m ({self.root_rule})",
            "leading edge": f"the {e} of the local chord nearest the leading edge",
            "mid-chord": "the rest of the blade body",
            "trailing edge": f"the {e} of the local chord nearest the trailing edge",
            "tip": f"outboard of r = {self.tip_boundary_m:.4g} m (outer {100 * self.tip_fraction:.3g} % of the span)",
        }

    @property
    def tip_fraction(self) -> float:
        """Outboard part of the span counted as the tip."""
        return (self.tip_m - self.tip_boundary_m) / (self.tip_m - self.root_m)


def _classify_regions(points: np.ndarray, chordwise: np.ndarray, root_boundary_m: float,
                     tip_boundary_m: float, edge_fraction: float = EDGE_FRACTION) -> np.ndarray:
    """(k,) region codes: tip first, then shank/root, then the edge bands, else mid-chord.

    >>> _classify_regions(np.array([[0, 0.1, 0], [0, 0.5, 0], [0, 0.5, 0], [0, 0.5, 0], [0, 0.95, 0]]),
    ...                  np.array([0.5, 0.9, 0.5, 0.1, 0.5]), 0.2, 0.9).tolist()
    [0, 1, 2, 3, 4]
    """
    y = np.asarray(points, dtype=float)[:, 1]
    s = np.asarray(chordwise, dtype=float)
    region = np.full(y.shape[0], MID_CHORD, dtype=np.int8)
    region[s >= 1.0 - edge_fraction] = LEADING_EDGE
    region[s <= edge_fraction] = TRAILING_EDGE
    region[y < root_boundary_m] = SHANK
    region[y >= tip_boundary_m] = TIP
    return region


def hot_spots(blade, fields: ElementFields, *, edge_fraction: float = EDGE_FRACTION,
              tip_fraction: float = TIP_FRACTION, root_fraction: float = ROOT_FRACTION,
              stations: int = 60) -> HotSpots:
    """Classify the elements into regions and tabulate each region's shares.

    Regions (by element centroid; the first rule that applies wins):

    * tip — the outer ``tip_fraction`` of the span (from the innermost to the outermost
      point of the solid along e);
    * shank/root — inboard of the end of the circular shank (see :func:`_root_boundary`),
      or the inner ``root_fraction`` of the span when the blade has no round shank;
    * leading edge / trailing edge — within ``edge_fraction`` of the local chord from that
      edge (section normal to e at the element's radius, edges interpolated between
      ``stations`` cuts);
    * mid-chord — the rest.
    """
    track = _section_track(blade.surfaces, blade.frame, stations)
    y = np.concatenate([np.asarray(v)[:, 1] for v, _ in blade.surfaces])
    root_m, tip_m = float(y.min()), float(y.max())
    rb, rule = _root_boundary(track, root_m, tip_m, root_fraction)
    tb = root_m + (1.0 - tip_fraction) * (tip_m - root_m)
    pts = fields.modelled_centroid_m
    s = _chordwise_position(pts, track)
    region = _classify_regions(pts, s, rb, tb, edge_fraction)
    tot = fields.totals
    vtot = float(fields.volume_m3.sum())

    def pct(part: float, whole: float) -> float:
        return 100.0 * part / whole if whole != 0.0 else float("nan")

    rows = []
    for code, name in enumerate(REGIONS):
        sel = region == code
        v = float(fields.volume_m3[sel].sum())
        m = float(fields.mass_kg[sel].sum())
        f = float(fields.radial_pull_N[sel].sum())
        c = float(fields.ctm_Nm[sel].sum())
        vp, cp = pct(v, vtot), pct(c, tot.ctm_Nm)
        rows.append({
            "region": name,
            "elements": int(np.count_nonzero(sel)),
            "volume_m3": v,
            "volume_pct": vp,
            "mass_kg": m,
            "mass_pct": pct(m, tot.mass_kg),
            "radial_pull_N": f,
            "radial_pull_pct": pct(f, tot.radial_pull_N),
            "ctm_Nm": c,
            "ctm_pct": cp,
            "ctm_per_volume_ratio": cp / vp if vp else float("nan"),
        })
    return HotSpots(
        names=REGIONS,
        region=region,
        chordwise=s,
        table=tuple(rows),
        root_m=root_m,
        tip_m=tip_m,
        root_boundary_m=rb,
        root_rule=rule,
        tip_boundary_m=float(tb),
        edge_fraction=float(edge_fraction),
        rpm=fields.rpm,
        blade_angle_deg=fields.blade_angle_deg,
    )


# --- for reports ------------------------------------------------------------------------------


def summary(fields: ElementFields, hotspots: HotSpots | None = None) -> dict:
    """The figures of the per-element review as plain data (SI; for the JSON/CSV/HTML report).

    Keys: ``rpm, blade_angle_deg, elements, totals, lumped, total_with_lumped, share_bands``
    and, with ``hotspots``, ``hot_spots: {regions, definitions, root_boundary_m,
    root_rule, tip_boundary_m, edge_fraction}``.
    """
    tot, allt = fields.totals, fields.total_with_lumped
    out = {
        "rpm": fields.rpm,
        "blade_angle_deg": fields.blade_angle_deg,
        "elements": len(fields),
        "totals": {"mass_kg": tot.mass_kg, "radial_pull_N": tot.radial_pull_N, "ctm_Nm": tot.ctm_Nm},
        "lumped": fields.lumped_rows(),
        "total_with_lumped": {"mass_kg": allt.mass_kg, "radial_pull_N": allt.radial_pull_N, "ctm_Nm": allt.ctm_Nm},
        "share_bands": fields.share_rows(),
        "opposing_pct": {"ctm_Nm": fields.ctm_shares.opposing_pct,
                         "radial_pull_N": fields.pull_shares.opposing_pct},
    }
    if hotspots is not None:
        out["hot_spots"] = {
            "regions": [dict(row) for row in hotspots.table],
            "definitions": hotspots.definitions(),
            "root_boundary_m": hotspots.root_boundary_m,
            "root_rule": hotspots.root_rule,
            "tip_boundary_m": hotspots.tip_boundary_m,
            "edge_fraction": hotspots.edge_fraction,
        }
    return out
