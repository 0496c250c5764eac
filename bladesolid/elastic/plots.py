"""Pictures of the elastic blade: von Mises renders, the spanwise plot and the Campbell chart.

Renders are off-screen (pyvista), plots are matplotlib; each carries the caution
(:data:`bladesolid.CAUTION`) as a footer at 8 pt or more, and every file goes through a
temporary file and a rename (an existing one is replaced only with ``force``). Colours:
``cividis`` for von Mises (unsigned, perceptually uniform, colour-vision-deficiency safe);
the Okabe–Ito colours for the mode families of the Campbell chart.
"""

from __future__ import annotations

import os

import numpy as np

from .. import CAUTION
from ..safefile import staged_file
from .model import ElasticModel
from .modes import Crossing, ModeSet
from .span import SpanElastic
from .static import StaticResult

WINDOW = (1400, 900)
INK = "#24272b"
BACKGROUND = "#f3f3f0"
#: Okabe & Ito (2008), "Color Universal Design" palette, one colour per mode family.
MODE_COLORS = {"flatwise": "#0072B2", "edgewise": "#D55E00", "torsion": "#009E73", "axial": "#CC79A7"}
ORDER_INK = "#9a9a94"
BLADE_PASSING_INK = "#5e3c99"


def _caution_lines(width_chars: int) -> list[str]:
    import textwrap

    return textwrap.wrap(CAUTION, width_chars)


# --- renders ---------------------------------------------------------------------------------


def _grid(model: ElasticModel, state: StaticResult):
    import pyvista as pv

    tets = model.mesh.elements[:, :4]
    cells = np.column_stack([np.full(len(tets), 4), tets]).ravel()
    grid = pv.UnstructuredGrid(cells, np.full(len(tets), pv.CellType.TETRA, dtype=np.uint8),
                               model.mesh.nodes[: model.mesh.n_vertices])
    grid.cell_data["von_mises_MPa"] = state.von_mises_Pa / 1e6
    return grid


def render_von_mises(model: ElasticModel, state: StaticResult, path, view: str = "planform", *,
                     root_fraction: float = 0.25, window_size=WINDOW, force: bool = False) -> str:
    """Render the blade coloured by the von Mises stress of each element (MPa) and write a PNG.

    view : ``planform`` (the whole blade seen along −k, leading edge up) or ``root`` (a
    close-up of the inboard ``root_fraction`` of the span, seen obliquely from the front and
    the leading edge, where the shank and root stresses peak).
    """
    import pyvista as pv

    if not os.environ.get("DISPLAY"):
        os.environ.setdefault("VTK_DEFAULT_OPENGL_WINDOW", "vtkEGLRenderWindow")
    if view not in ("planform", "root"):
        raise ValueError(f"view must be 'planform' or 'root', got {view!r}")
    grid = _grid(model, state)
    frame = model.frame
    y = model.mesh.nodes[:, 1]
    if view == "root":
        cut = y.min() + root_fraction * (y.max() - y.min())
        grid = grid.extract_cells(np.flatnonzero(grid.cell_centers().points[:, 1] <= cut))
    surface = grid.extract_surface(algorithm="dataset_surface")
    win = tuple(window_size)
    pl = pv.Plotter(off_screen=True, window_size=list(win), border=False)
    pl.set_background(BACKGROUND)
    vm = np.asarray(surface.cell_data["von_mises_MPa"])
    pl.add_mesh(surface, scalars="von_mises_MPa", cmap="cividis", clim=(0.0, float(vm.max()) or 1.0),
                show_edges=False, scalar_bar_args={
                    "title": "von Mises stress, MPa (element centroid)", "color": INK, "title_font_size": 16,
                    "label_font_size": 14, "width": 0.5, "position_x": 0.25, "position_y": 0.12, "fmt": "%.4g"})
    pts = np.asarray(surface.points)
    centre = 0.5 * (pts.min(axis=0) + pts.max(axis=0))
    size = float(np.ptp(pts, axis=0).max())
    if view == "planform":
        d, up = frame.f, frame.t
    else:
        d = frame.f + 0.8 * frame.t - 0.5 * frame.e
        d, up = d / np.linalg.norm(d), frame.e
    right = np.cross(up, d)
    right /= np.linalg.norm(right)
    up = np.cross(d, right)
    u, w = (pts - centre) @ right, (pts - centre) @ up
    mid = centre + 0.5 * (u.max() + u.min()) * right + 0.5 * (w.max() + w.min()) * up
    half_h = max(0.5 * np.ptp(w), 0.5 * np.ptp(u) * win[1] / win[0], 1e-9)
    mid = mid - 0.3 * half_h * up  # the blade a little above the middle: the bar and caution go below
    pl.enable_parallel_projection()
    pl.camera.focal_point = tuple(mid)
    pl.camera.position = tuple(mid + 3.0 * size * d)
    pl.camera.up = tuple(up)
    pl.camera.parallel_scale = 1.45 * half_h  # room for the titles above and the bar and caution below
    pl.camera.clipping_range = (0.1 * size, 6.0 * size)
    i = state.max_von_mises_element
    peak = state.max_von_mises_at_m
    pl.add_point_labels(np.array([peak]), [f"max {state.max_von_mises_Pa / 1e6:.4g} MPa"], font_size=16,
                        text_color=INK, point_color="#D55E00", point_size=14, render_points_as_spheres=True,
                        shape_opacity=0.6, always_visible=True)
    pl.add_text(f"{model.name}: von Mises stress, centrifugal load — {state.rpm:g} rpm, blade angle "
                f"{state.blade_angle_deg:.1f}°  ({view})", position="upper_left", font_size=14, color=INK)
    pl.add_text(f"{state.elements:,} quadratic tetrahedra, {state.dofs:,} DOFs; untwist {state.untwist_deg:+.4g}°; "
                f"max at element {i} ({peak[0] * 1e3:.1f}, {peak[1] * 1e3:.1f}, {peak[2] * 1e3:.1f}) mm",
                position=(0.015 * win[0], win[1] - 80), font_size=11, color=INK)
    for j, line in enumerate(reversed(_caution_lines(110))):
        pl.add_text(line, position=(0.015 * win[0], 10 + j * 20), font_size=11, color=INK)
    with staged_file(path, force) as tmp:
        pl.screenshot(tmp)
    pl.close()
    return os.fspath(path)


# --- matplotlib ------------------------------------------------------------------------------


def _figure(size=(9.0, 6.5)):
    from matplotlib.figure import Figure

    return Figure(figsize=size, dpi=150, facecolor="white", layout="constrained")


def _footer(fig):
    fig.get_layout_engine().set(rect=(0, 0.06, 1, 0.94))
    fig.text(0.01, 0.005, "\n".join(_caution_lines(130)), fontsize=8, color=INK, va="bottom", ha="left")


def _save(fig, path, force):
    with staged_file(path, force) as tmp:
        fig.savefig(tmp, format=os.path.splitext(os.fspath(path))[1].lstrip(".").lower() or "png")
    return os.fspath(path)


def _style(ax):
    ax.grid(True, color="#d9d9d4", linewidth=0.7)
    ax.set_axisbelow(True)
    for s in ("top", "right"):
        ax.spines[s].set_visible(False)
    ax.tick_params(labelsize=9)


def plot_spanwise(span: SpanElastic, path, title: str = "", *, force: bool = False) -> str:
    """Untwist (deg) and mean axial stress against P/A (MPa) along the span (m)."""
    fig = _figure()
    ax1, ax2 = fig.subplots(2, 1, sharex=True)
    r = span.radius_m
    ax1.plot(r, span.untwist_deg, "o-", color="#0072B2", lw=1.6, ms=4)
    ax1.axhline(0.0, color=INK, lw=0.8)
    ax1.set_ylabel("untwist, deg (+ toward coarse)")
    ax2.plot(r, span.mean_axial_stress_Pa / 1e6, "o-", color="#D55E00", lw=1.6, ms=4,
             label="mean axial stress σ_ee over the section (elastic solve)")
    ax2.plot(r, span.p_over_a_Pa / 1e6, "--", color=INK, lw=1.2, label="P/A (outboard radial pull / area)")
    ax2.set_ylabel("stress, MPa")
    ax2.set_xlabel("radius along the pitch axis, m")
    ax2.legend(fontsize=8, frameon=False)
    for ax in (ax1, ax2):
        _style(ax)
    fig.suptitle(title or f"Spanwise untwist and axial stress — {span.rpm:g} rpm, blade angle "
                 f"{span.blade_angle_deg:.1f}°", fontsize=11)
    _footer(fig)
    return _save(fig, path, force)


def plot_campbell(sweep: list[ModeSet], path, *, blades: int | None = None, orders=range(1, 9),
                  crossings: list[Crossing] | None = None, title: str = "", force: bool = False) -> str:
    """Frequency–speed (Campbell) chart: each mode's frequency (Hz, rotating frame) against
    speed (rpm), coloured by its label at each speed; the excitation lines n·rpm/60 for the
    ``orders`` and the blade-passing order, labelled; the crossings marked."""
    from matplotlib.lines import Line2D

    from .modes import COUPLING_NOTE, crossings as find_crossings

    pts = sorted(sweep, key=lambda s: s.rpm)
    rpm = np.array([s.rpm for s in pts])
    n_modes = min(len(s.frequencies_Hz) for s in pts)
    F = np.array([[s.frequencies_Hz[i] for s in pts] for i in range(n_modes)])
    fig = _figure((9.5, 7.0))
    ax = fig.subplots()
    fmax = float(np.nanmax(F)) * 1.08
    rmax = float(rpm.max()) * 1.02 or 1.0
    all_orders = sorted(set(int(n) for n in orders) | ({int(blades)} if blades else set()))
    for n in all_orders:
        bp = bool(blades and n == blades)
        x_end = min(rmax, fmax * 60.0 / n)
        ax.plot([0, x_end], [0, n * x_end / 60.0], color=BLADE_PASSING_INK if bp else ORDER_INK,
                lw=1.6 if bp else 0.8, ls="--" if bp else "-", zorder=1)
        ax.annotate(f"{n}P" + (" (blade passing)" if bp else ""), (x_end, n * x_end / 60.0), fontsize=8,
                    color=BLADE_PASSING_INK if bp else "#6b6b66", xytext=(2, 2), textcoords="offset points")
    for i in range(n_modes):
        ax.plot(rpm, F[i], color="#8a8a85", lw=1.0, zorder=2)
        for j, s in enumerate(pts):
            ax.plot(rpm[j], F[i, j], "o", ms=4.5, color=MODE_COLORS.get(s.labels[i], INK), zorder=3)
        ax.annotate(f"mode {i + 1}", (rpm[-1], F[i, -1]), fontsize=8, xytext=(4, -3), textcoords="offset points")
    cr = find_crossings(sweep, blades=blades, orders=orders) if crossings is None else crossings
    for c in cr:
        ax.plot(c.rpm, c.frequency_Hz, "o", ms=9, mfc="none", mec="#D55E00" if c.blade_passing else INK, mew=1.4,
                zorder=4)
    ax.set_xlim(0, rmax * 1.08)
    ax.set_ylim(0, fmax)
    ax.set_xlabel("speed, rpm")
    ax.set_ylabel("natural frequency, Hz (rotating frame)")
    _style(ax)
    handles = [Line2D([], [], marker="o", ls="", color=c, label=lab) for lab, c in MODE_COLORS.items()
               if any(lab in s.labels for s in pts)]
    handles.append(Line2D([], [], marker="o", ls="", mfc="none", mec=INK, ms=9, label=f"crossing ({len(cr)})"))
    ax.legend(handles=handles, fontsize=8, frameon=False, loc="upper left")
    fig.suptitle(title or "Frequency–speed (Campbell) chart", fontsize=11)
    ax.set_title(COUPLING_NOTE + "; the steady state with centrifugal stiffening at each speed", fontsize=8)
    _footer(fig)
    return _save(fig, path, force)
