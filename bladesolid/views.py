"""Pictures of the blade and its per-element fields: pyvista renders, matplotlib plots, VTU.

Renders are made off-screen (``pv.Plotter(off_screen=True)``) and every file is written to a
temporary file in the same folder and renamed into place; an existing file is only replaced
with ``force=True``. A series of renders shares one plotter (:class:`RenderSession`), and each
picture is drawn once and encoded straight from the rendered image.

Every picture carries the safety caution as a footer (:func:`add_caution`: matplotlib figures,
pyvista renders and interactive windows alike), legible at the picture's saved size.

Colour maps (chosen on merit):

* signed fields (CTM, anything that takes both signs): ``PuOr`` — a ColorBrewer diverging
  map rated colour-blind safe, with a symmetric lightness ramp around a neutral centre;
  purple and orange stay apart for the common colour-vision deficiencies. Limits are
  symmetric about zero, so white is exactly zero; orange is toward fine, purple toward
  coarse.
* unsigned fields (mass, radial pull of an ordinary blade): ``cividis`` — perceptually
  uniform and designed for colour-vision deficiency; its lightness rises monotonically, so
  it also reads in greyscale. Limits start at zero, so colour is in proportion to value.
* surface deviation (compare): ``BrBG`` — diverging and colour-blind safe like ``PuOr``, but
  deliberately different, so a deviation picture is never mistaken for a load picture.
* categories (share bands, regions): fixed colour-blind-safe palettes (a purple ramp for the
  nested share sets; the Okabe–Ito colours for regions) with a labelled colour key.

Per-element contributions are shown as densities (contribution per cm³ of element) by
default so large elements do not dominate the picture; ``per_volume=False`` shows the raw
per-element values. Geometry is in the hub frame at the chosen blade angle; the nodes are
moved by the pitch motion for display only.
"""

from __future__ import annotations

import contextlib
import functools
import io
import math
import os
from dataclasses import dataclass

import numpy as np

from . import CAUTION
from .errors import InputError
from .fields import REGIONS, ElementFields, HotSpots, hot_spots
from .frame import HubFrame, hub_frame, pitch_motion
from .safefile import atomic_write_bytes, staged_file

# --- style -----------------------------------------------------------------------------

BACKGROUND = "#f3f3f0"      # neutral warm light grey
INK = "#24272b"             # text, outlines
AXIS_INK = "#4a5058"        # pitch and rotation axes (thin chain lines)
STATION_INK = "#1b6f7a"     # reference station
SIGNED_CMAP = "PuOr"
UNSIGNED_CMAP = "cividis"
DEVIATION_CMAP = "BrBG"
WINDOW = (1400, 900)
#: Resolution every picture is made for, written into each PNG: a 1400-px render is 9.3 in
#: wide, like the 9-in plots.
PICTURE_DPI = 150
#: The caution footer's size at that resolution, points. 8 pt is about the smallest text
#: commonly held legible in print (common practice, no source).
CAUTION_PT = 8.5
CAUTION_INK = "#4d4d48"
#: zlib level of the PNGs: 3 encodes about twice as fast as Pillow's default 6 for files
#: under a tenth larger (measured on the review's renders).
PNG_COMPRESS_LEVEL = 3

#: Okabe & Ito (2008), "Color Universal Design" palette, for the regions.
REGION_COLORS = {
    "shank/root": "#7f7f7f",
    "leading edge": "#0072B2",
    "mid-chord": "#d8cfb6",
    "trailing edge": "#D55E00",
    "tip": "#009E73",
}
#: Nested share sets: darkest = the fewest elements carrying 50 %.
BAND_COLORS = {50: "#3f1f6e", 80: "#7b68b0", 95: "#c3bddf", 100: "#ecebe6"}
BAND_LABELS = {50: "50 % set", 80: "50–80 %", 95: "80–95 %", 100: "rest"}


@dataclass(frozen=True)
class FieldStyle:
    """How a per-element field is named and scaled in pictures.

    label : words for titles;  unit : unit of the raw field as displayed
    raw_scale : display = raw SI value × raw_scale
    density_unit, density_scale : per-volume display = (SI per m³) × density_scale
    signed : "yes" always diverging, "auto" diverging only if both signs occur, "no" sequential
    categories : category values (share bands, regions) or None for continuous fields
    """

    label: str
    unit: str
    raw_scale: float = 1.0
    density_unit: str | None = None
    density_scale: float = 1.0
    signed: str = "auto"
    categories: tuple | None = None


FIELD_STYLES = {
    "ctm_Nm": FieldStyle("CTM", "N·m", 1.0, "N·m/cm³", 1e-6, "yes"),
    "radial_pull_N": FieldStyle("radial pull", "N", 1.0, "N/cm³", 1e-6, "auto"),
    "mass_kg": FieldStyle("mass", "g", 1e3, "g/cm³", 1e-3, "no"),
    "volume_m3": FieldStyle("element volume", "cm³", 1e6, None, 1.0, "no"),
    "ctm_share_band": FieldStyle("CTM share band", "%", categories=(50, 80, 95, 100)),
    "pull_share_band": FieldStyle("radial-pull share band", "%", categories=(50, 80, 95, 100)),
    "region": FieldStyle("region", "", categories=tuple(range(len(REGIONS)))),
    "body": FieldStyle("body", "", categories=None, signed="no"),
}


def _font(window_size, points: float) -> int:
    """A font size that keeps its proportion to the window (``points`` at 1400 × 900 px)."""
    return max(6, int(round(points * min(window_size[0] / 1400.0, window_size[1] / 900.0))))


def _pt(fs: int, factor: float) -> int:
    """A font size in proportion to the base size ``fs``."""
    return max(5, int(round(fs * factor)))


# --- the caution on every picture -----------------------------------------------------------


def wrap_to_width(text: str, width: float, measure) -> list[str]:
    """Greedy word wrap: lines of whole words whose ``measure(line)`` fits ``width`` (a word
    longer than the width gets a line of its own).

    >>> wrap_to_width("one two three four", 9, len)
    ['one two', 'three', 'four']
    """
    lines: list[str] = []
    for word in text.split():
        if lines and measure(f"{lines[-1]} {word}") <= width:
            lines[-1] = f"{lines[-1]} {word}"
        else:
            lines.append(word)
    return lines


def caution_px() -> int:
    """The caution footer's font size in a render, pixels (:data:`CAUTION_PT` at
    :data:`PICTURE_DPI`, rounded up).

    >>> caution_px()
    18
    """
    return int(math.ceil(CAUTION_PT * PICTURE_DPI / 72.0))


_FOOTER_MARGIN_PX = 8
_FOOTER_LINE_SPACING = 1.25


def _footer_text_property(prop):
    """The footer's font on a ``vtkTextProperty`` (the same for measuring and drawing)."""
    prop.SetFontFamilyToArial()
    prop.SetFontSize(caution_px())
    prop.SetLineSpacing(_FOOTER_LINE_SPACING)
    prop.SetJustificationToLeft()
    prop.SetVerticalJustificationToBottom()
    return prop


@functools.lru_cache(maxsize=16)
def _vtk_caution(width_px: int) -> tuple[str, int]:
    """(text wrapped to ``width_px``, its height in px) of the caution in a render."""
    from vtkmodules.vtkRenderingCore import vtkTextProperty, vtkTextRenderer
    import vtkmodules.vtkRenderingFreeType  # noqa: F401  (registers the text renderer)

    prop = _footer_text_property(vtkTextProperty())
    renderer = vtkTextRenderer.GetInstance()

    def extent(text):
        box = [0, 0, 0, 0]
        renderer.GetBoundingBox(prop, text, box, 72)  # VTK's font sizes are points at 72 dpi: pixels
        return box[1] - box[0] + 1, box[3] - box[2] + 1

    text = "\n".join(wrap_to_width(CAUTION, width_px - 2 * _FOOTER_MARGIN_PX, lambda t: extent(t)[0]))
    return text, extent(text)[1]


def footer_fraction(window_size) -> float:
    """Fraction of a render's height, from the bottom, taken by the caution footer."""
    _, h = _vtk_caution(int(window_size[0]))
    return (h + 2 * _FOOTER_MARGIN_PX) / float(window_size[1])


def _mpl_caution_lines(text: str, width_pt: float, size_pt: float) -> list[str]:
    from matplotlib.font_manager import FontProperties
    from matplotlib.textpath import TextToPath

    prop, ttp = FontProperties(size=size_pt), TextToPath()
    out = []
    for paragraph in text.split("\n"):
        out += wrap_to_width(paragraph, width_pt, lambda t: ttp.get_text_width_height_descent(t, prop, ismath=False)[0])
    return out


def add_caution(target, *, above: str = ""):
    """Put the safety caution (:data:`bladesolid.CAUTION`) on a picture as a footer, legible
    (:data:`CAUTION_PT` points at :data:`PICTURE_DPI`) and wrapped to the picture's width.

    target : a matplotlib ``Figure`` — the footer goes across the bottom and the figure's
      layout (its constrained or tight layout engine, else a tight layout made at once, so add
      the footer last) keeps the axes above it; ``above`` (optional
      lines, e.g. definitions of what a plot shows) is set just above the footer at 7 pt; or
      a pyvista ``Plotter`` (off-screen or an interactive window) — a text actor named
      ``"caution"`` at the bottom left of the active renderer's viewport, which the caller
      keeps clear (:func:`footer_fraction` of the window height).
    Returns the matplotlib ``Text`` or the text actor.
    """
    if hasattr(target, "savefig"):
        return _caution_on_figure(target, above)
    if hasattr(target, "add_text") and hasattr(target, "renderer"):
        if above:
            raise ValueError("add_caution: 'above' is for matplotlib figures only")
        return _caution_on_plotter(target)
    raise TypeError(f"add_caution: expected a matplotlib Figure or a pyvista Plotter, got {type(target).__name__}")


def _caution_on_figure(fig, above: str = ""):
    from matplotlib.layout_engine import ConstrainedLayoutEngine, TightLayoutEngine

    w_pt, h_pt = fig.get_figwidth() * 72.0, fig.get_figheight() * 72.0
    margin = 0.015 * w_pt
    usable = 0.96 * (w_pt - 2 * margin)  # a little slack: hinting makes rendered text a bit wider
    lines = _mpl_caution_lines(CAUTION, usable, CAUTION_PT)
    pad = 0.5 * CAUTION_PT
    height = pad + len(lines) * 1.2 * CAUTION_PT
    text = fig.text(margin / w_pt, pad / h_pt, "\n".join(lines), fontsize=CAUTION_PT, color=CAUTION_INK,
                    ha="left", va="bottom", gid="caution")
    if above:
        note = _mpl_caution_lines(above, usable, 7.0)
        fig.text(margin / w_pt, (height + 0.6 * CAUTION_PT) / h_pt, "\n".join(note), fontsize=7.0, color="#55554f",
                 ha="left", va="bottom", gid="caution-note")
        height += 0.6 * CAUTION_PT + len(note) * 1.2 * 7.0
    frac = min((height + pad) / h_pt, 0.5)
    engine = fig.get_layout_engine()
    if isinstance(engine, ConstrainedLayoutEngine):
        engine.set(rect=(0.0, frac, 1.0, 1.0 - frac))
    elif isinstance(engine, TightLayoutEngine):
        engine.set(rect=(0.0, frac, 1.0, 1.0))
    else:
        # no layout engine: lay the figure out now, once (an engine would make savefig draw
        # the figure twice); so, for such a figure, the footer is the last thing added
        fig.tight_layout(rect=(0.0, frac, 1.0, 1.0))
    return text


def _caution_on_plotter(pl):
    x0, _, x1, _ = pl.renderer.GetViewport()
    width = int(round((x1 - x0) * pl.window_size[0]))
    text, _ = _vtk_caution(width)
    actor = pl.add_text(text, position=(_FOOTER_MARGIN_PX, _FOOTER_MARGIN_PX), font_size=caution_px() / 2.0,
                        color=CAUTION_INK, name="caution")
    _footer_text_property(actor.GetTextProperty())  # exactly the measured font (pyvista rounds font_size)
    return actor


def has_caution(pl) -> bool:
    """True when a pyvista plotter carries the caution footer in one of its renderers."""
    return any("caution" in r.actors for r in pl.renderers)


# --- the element grid ------------------------------------------------------------------


def display_motion(blade, fields: ElementFields):
    """(R, t): the pitch motion from the modelled position to the fields' blade angle."""
    return pitch_motion(blade.frame, fields.blade_angle_deg - fields.modelled_deg)


def element_grid(blade, fields: ElementFields, hotspots: HotSpots | None = None):
    """The mass elements as a ``pv.UnstructuredGrid`` (linear tetrahedra, hub frame, m) at
    the fields' blade angle, with every per-element field as cell data.

    Cell data: ``mass_kg, volume_m3, radial_pull_N, ctm_Nm`` (raw, SI);
    ``mass_g_per_cm3, radial_pull_N_per_cm3, ctm_Nm_per_cm3`` (per element volume);
    ``ctm_share_band, pull_share_band`` (50/80/95/100); ``region`` (code into
    :data:`bladesolid.fields.REGIONS`); ``chordwise`` (0 trailing edge … 1 leading edge);
    ``body``. Field data: rpm, blade angles, totals, one ``region_<code>_<name>`` entry per
    region holding its code, and ``caution``: the safety caution as UTF-8 bytes (``uint8``;
    ``bytes(grid.field_data["caution"]).decode()`` reads it). A VTK string array would be the
    natural form, but meshio (and so bladesolid's own volume-mesh reader) refuses a file that
    has one; the file written by :func:`write_vtu` also carries the caution as readable text.
    """
    import pyvista as pv

    if hotspots is None:
        hotspots = hot_spots(blade, fields)
    R, t = display_motion(blade, fields)
    nodes = np.asarray(blade.element_nodes, dtype=float) @ R.T + t
    tets = np.asarray(blade.element_tets, dtype=np.int64)
    cells = np.hstack([np.full((len(tets), 1), 4, dtype=np.int64), tets]).ravel()
    grid = pv.UnstructuredGrid(cells, np.full(len(tets), pv.CellType.TETRA, dtype=np.uint8), nodes)
    cd = grid.cell_data
    cd["mass_kg"] = fields.mass_kg
    cd["volume_m3"] = fields.volume_m3
    cd["radial_pull_N"] = fields.radial_pull_N
    cd["ctm_Nm"] = fields.ctm_Nm
    cd["mass_g_per_cm3"] = fields.per_volume("mass_kg") * 1e-3
    cd["radial_pull_N_per_cm3"] = fields.per_volume("radial_pull_N") * 1e-6
    cd["ctm_Nm_per_cm3"] = fields.per_volume("ctm_Nm") * 1e-6
    cd["ctm_share_band"] = fields.ctm_share_band.astype(np.int32)
    cd["pull_share_band"] = fields.pull_share_band.astype(np.int32)
    cd["region"] = hotspots.region.astype(np.int32)
    cd["chordwise"] = hotspots.chordwise
    cd["body"] = np.asarray(fields.body, dtype=np.int32)
    fd = grid.field_data
    fd["rpm"] = np.array([fields.rpm])
    fd["blade_angle_deg"] = np.array([fields.blade_angle_deg])
    fd["modelled_blade_angle_deg"] = np.array([fields.modelled_deg])
    fd["total_mass_kg"] = np.array([fields.totals.mass_kg])
    fd["total_radial_pull_N"] = np.array([fields.totals.radial_pull_N])
    fd["total_ctm_Nm"] = np.array([fields.totals.ctm_Nm])
    for code, name in enumerate(REGIONS):  # numbers only: string arrays break other VTU readers
        fd[f"region_{code}_" + name.replace("/", "_").replace(" ", "_").replace("-", "_")] = np.array([code])
    fd["caution"] = caution_codes()
    return grid


def caution_codes() -> np.ndarray:
    """The caution as an array of its UTF-8 bytes (``uint8``), for files that hold numbers only.

    >>> bytes(caution_codes()).decode("utf-8") == CAUTION
    True
    """
    return np.frombuffer(CAUTION.encode("utf-8"), dtype=np.uint8).copy()


def _with_xml_comment(data: bytes, comment: str) -> bytes:
    r"""XML file bytes with ``<!-- comment -->`` after the XML declaration (or at the start).

    >>> _with_xml_comment(b'<?xml version="1.0"?>\n<a/>\n', "note")
    b'<?xml version="1.0"?>\n<!-- note -->\n<a/>\n'
    """
    if "--" in comment or comment.endswith("-"):
        raise ValueError("an XML comment cannot hold '--' or end in '-'")
    text = f"<!-- {comment} -->\n".encode("utf-8")
    if data.startswith(b"<?xml"):
        end = data.index(b"?>") + 2
        if data[end:end + 1] == b"\n":
            end += 1
        else:
            text = b"\n" + text
        return data[:end] + text + data[end:]
    return text + data


def write_vtu(grid, path, force: bool = False) -> str:
    """Write the element grid (nodes, elements, every field) as a VTK XML ``.vtu`` file, with
    the caution in its field data (``caution``, see :func:`element_grid`) and as an XML
    comment at the top of the file (ignored by every XML reader)."""
    p = os.fspath(path)
    if not p.lower().endswith(".vtu"):
        raise InputError(p, "the element file must end in .vtu")
    return atomic_write_bytes(p, vtu_bytes(grid), force)


def vtu_bytes(grid) -> bytes:
    """The ``.vtu`` file of :func:`write_vtu`, as bytes."""
    import tempfile

    if "caution" not in grid.field_data:
        grid = grid.copy(deep=False)
        grid.field_data["caution"] = caution_codes()
    with tempfile.TemporaryDirectory(prefix="bladesolid-") as d:
        tmp = os.path.join(d, "elements.vtu")
        grid.save(tmp, binary=True)
        with open(tmp, "rb") as fh:
            data = fh.read()
    return _with_xml_comment(data, CAUTION)


# --- scene helpers ---------------------------------------------------------------------


def _new_plotter(window_size, shape=(1, 1), interactive: bool = False, **kw):
    import pyvista as pv

    if not os.environ.get("DISPLAY"):
        # Headless: go straight to EGL instead of trying (and warning about) an X server.
        os.environ.setdefault("VTK_DEFAULT_OPENGL_WINDOW", "vtkEGLRenderWindow")
    theme = pv.themes.DocumentTheme()
    theme.background = BACKGROUND
    theme.font.color = INK
    theme.font.family = "arial"
    theme.show_edges = False
    # Anti-aliasing by FXAA (one filtering pass over the finished image): on the software
    # renderer of a headless machine it costs about half of 4x multisampling and a third of
    # super-sampling, for edges and thin lines that look the same at the saved size (measured
    # on the review's renders). Set through VTK: pyvista declines FXAA on EGL, but VTK's
    # filter draws correctly there (the render tests check the pictures).
    theme.multi_samples = 0
    pl = pv.Plotter(off_screen=not interactive, window_size=list(window_size), shape=shape, theme=theme,
                    border=False, **kw)
    for r in pl.renderers:
        r.SetUseFXAA(True)
    return pl


def _plotter(window_size, shape=(1, 1), interactive: bool = False, session=None, **kw):
    """A plotter for one picture: the ``session``'s (cleared) when given, else a new one."""
    if session is not None and not interactive:
        return session.plotter(window_size, shape, **kw)
    return _new_plotter(window_size, shape, interactive, **kw)


class RenderSession:
    """Off-screen plotters and scene pieces shared by a series of renders.

    Opening a plotter (an OpenGL context and its shaders) and extracting a grid's surface and
    outline cost more than drawing one picture; the renders of a review all show the same
    element grid. Inside a session each render clears and reuses the plotter of its window
    size and layout, reuses the surface and outline of a grid it has seen, and is drawn exactly
    once. Pictures are the same as without a session::

        with views.render_session() as s:
            views.render_field(blade, fields, "ctm_Nm", "ctm.png", grid=grid, session=s)
            views.render_field(blade, fields, "mass_kg", "mass.png", grid=grid, session=s)

    One session per thread; closed (its plotters released) when the ``with`` block ends.
    """

    def __init__(self):
        self._plotters: dict = {}
        self._rendered: set = set()
        self._memo: dict = {}

    def plotter(self, window_size, shape=(1, 1), **kw):
        key = (tuple(int(v) for v in window_size), tuple(shape), repr(sorted(kw.items())))
        pl = self._plotters.get(key)
        if pl is None:
            pl = self._plotters[key] = _new_plotter(window_size, shape, False, **kw)
        else:
            # remove the last picture's actors and colour bars; lights and window stay
            for r in pl.renderers:
                r.clear_actors()
            pl.scalar_bars.clear()
            pl.subplot(0, 0)
        pl.suppress_rendering = True  # nothing is drawn while the scene is built: once, in _finish
        return pl

    def memo(self, key: tuple, obj, make):
        """``make()`` once per (key, obj) for the session's lifetime (``obj`` is kept alive,
        so its id is not reused)."""
        k = key + (id(obj),)
        if k not in self._memo:
            self._memo[k] = (obj, make())
        return self._memo[k][1]

    def draw(self, pl):
        """Render ``pl`` once and return its image, (h, w, 3) uint8."""
        pl.suppress_rendering = False
        if id(pl) in self._rendered:
            pl.render()  # later pictures: an explicit render (screenshot only renders the first time)
        self._rendered.add(id(pl))
        return pl.screenshot(None, return_img=True)

    def close(self):
        for pl in self._plotters.values():
            pl.close()
        self._plotters.clear()
        self._rendered.clear()
        self._memo.clear()


@contextlib.contextmanager
def render_session():
    """A :class:`RenderSession` closed when the block ends."""
    s = RenderSession()
    try:
        yield s
    finally:
        s.close()


def _memo(session, key: tuple, obj, make):
    return make() if session is None else session.memo(key, obj, make)


def has_display() -> bool:
    """True when an interactive window can be opened (an X display is set)."""
    return bool(os.environ.get("DISPLAY") or os.environ.get("WAYLAND_DISPLAY"))


def png_bytes(image, dpi: float = PICTURE_DPI) -> bytes:
    """An (h, w, 3|4) uint8 image as PNG bytes, marked ``dpi`` (default :data:`PICTURE_DPI`)."""
    from PIL import Image

    buf = io.BytesIO()
    Image.fromarray(np.ascontiguousarray(image)).save(buf, format="png", compress_level=PNG_COMPRESS_LEVEL,
                                                      dpi=(dpi, dpi))
    return buf.getvalue()


def _deliver(data: bytes, path, force: bool):
    """Write ``data`` to ``path`` (atomically; an existing file only with ``force``) or into
    a binary file object. Returns the path (or the file object)."""
    if hasattr(path, "write"):
        path.write(data)
        return path
    return atomic_write_bytes(path, data, force)


def _finish(pl, path, force: bool, session=None):
    if not has_caution(pl):
        raise RuntimeError("internal: a picture without the caution footer (views.add_caution)")
    if path is None:  # interactive: the user looks, turns and closes the window
        pl.show()
        return None
    if session is None:
        try:
            image = pl.screenshot(None, return_img=True)
        finally:
            pl.close()
    else:
        image = session.draw(pl)
    return _deliver(png_bytes(image), path, force)


def _chain_line(a, b, dash: float):
    """A thin 'chain line' (long dash, short dash) from a to b, as used for axes in drawings."""
    import pyvista as pv

    a, b = np.asarray(a, float), np.asarray(b, float)
    L = float(np.linalg.norm(b - a))
    u = (b - a) / L
    pattern = [(0.0, 1.0), (1.3, 1.55)]  # (start, end) in units of dash within one period of 2
    pts, lines = [], []
    s = 0.0
    while s < L:
        for lo, hi in pattern:
            p0, p1 = s + lo * dash, min(s + hi * dash, L)
            if p0 < L:
                i = len(pts)
                pts += [a + p0 * u, a + p1 * u]
                lines += [2, i, i + 1]
        s += 2.0 * dash
    return pv.PolyData(np.array(pts), lines=np.array(lines))


def _end_on_symbol(centre, normal, radius, toward_viewer: bool):
    """A circle with a dot (axis pointing at the viewer) or a cross (away), normal to the axis."""
    import pyvista as pv

    n = normal / np.linalg.norm(normal)
    u = np.cross(n, [1.0, 0, 0]) if abs(n[0]) < 0.9 else np.cross(n, [0, 1.0, 0])
    u /= np.linalg.norm(u)
    v = np.cross(n, u)
    th = np.linspace(0, 2 * np.pi, 49)
    ring = centre + radius * (np.cos(th)[:, None] * u + np.sin(th)[:, None] * v)
    parts = [pv.lines_from_points(ring)]
    if toward_viewer:
        parts.append(pv.Disc(center=centre, inner=0.0, outer=0.28 * radius, normal=n, c_res=24))
    else:
        for w in (u + v, u - v):
            w = w / np.linalg.norm(w) * radius * 0.7
            parts.append(pv.Line(centre - w, centre + w))
    return parts


def _view_basis(frame: HubFrame, view: str):
    """(direction of projection d, view up u) for a named view, hub frame."""
    k, e, t, f = frame.k, frame.e, frame.t, frame.f
    if view == "planform":          # from the front, looking along −k; leading edge up
        d, up = -k, t
    elif view == "tip":             # from the tip, looking inboard along −e; forward up
        d, up = -e, f
    elif view == "iso":             # from in front, on the leading-edge side, a little outboard
        d = -(0.62 * f + 0.38 * t - 0.36 * e)
        up = t + 0.25 * f
    elif view == "cutaway":         # from in front and outboard: faces normal to e show
        d = -(0.70 * f + 0.62 * e + 0.22 * t)
        up = t
    elif view == "aft":             # from behind (pressure side), looking along +k
        d, up = k, t
    else:
        raise ValueError(f"unknown view {view!r}; expected 'planform', 'tip', 'iso' or 'aft'")  # cutaway: internal
    d = d / np.linalg.norm(d)
    up = up - (up @ d) * d
    return d, up / np.linalg.norm(up)


@dataclass(frozen=True)
class _Camera:
    """A parallel-projection camera: direction d, view up, focal point, half height (m)."""

    d: np.ndarray
    up: np.ndarray
    focal: np.ndarray
    scale: float
    depth: float
    window: tuple

    @property
    def right(self) -> np.ndarray:
        return np.cross(self.d, self.up)

    @property
    def per_pixel(self) -> float:
        """World length of one pixel, m."""
        return 2.0 * self.scale / self.window[1]

    def front(self, points) -> np.ndarray:
        """Points moved toward the viewer in front of the whole scene (same place on screen)."""
        return np.asarray(points, float) - self.d * (0.6 * self.depth)

    def apply(self, pl) -> None:
        cam = pl.camera
        cam.parallel_projection = True
        cam.focal_point = self.focal
        dist = 4.0 * self.depth + 4.0 * self.scale
        cam.position = self.focal - self.d * dist
        cam.up = self.up
        cam.parallel_scale = self.scale
        # room for the overlays drawn in front of the scene (see :meth:`front`)
        cam.clipping_range = (max(dist - 2.0 * self.depth, 1e-3 * dist), dist + 2.0 * self.depth)


def _fit_camera(points, d, up, window, band=(0.0, 1.0), hband=(0.0, 1.0), margin=1.06) -> _Camera:
    """Parallel projection along ``d`` with ``points`` (n, 3) filling the window region
    ``hband`` × ``band`` (fractions of width and height, from the lower left)."""
    pts = np.asarray(points, float)
    right = np.cross(d, up)
    x, y = pts @ right, pts @ up
    c = pts.mean(axis=0)
    cx, cy = 0.5 * (x.max() + x.min()), 0.5 * (y.max() + y.min())
    w, h = x.max() - x.min(), y.max() - y.min()
    aspect = window[0] / window[1]
    bh, bw = band[1] - band[0], hband[1] - hband[0]
    scale = 0.5 * margin * max(h / bh, w / (aspect * bw), 1e-9)
    H = 2.0 * scale
    oy = (0.5 * (band[0] + band[1]) - 0.5) * H
    ox = (0.5 * (hband[0] + hband[1]) - 0.5) * H * aspect
    depth = float(np.ptp(pts @ d)) + float(np.linalg.norm(np.ptp(pts, axis=0)))
    focal = c + (cx - c @ right - ox) * right + (cy - c @ up - oy) * up
    return _Camera(np.asarray(d, float), np.asarray(up, float), focal, float(scale), depth, tuple(window))


def _field_values(grid, name: str, per_volume: bool):
    """(array name in the grid, SI→display scale, unit text, is density) for a field."""
    style = FIELD_STYLES[name]
    if style.categories is not None or name == "body":
        return name, 1.0, style.unit, False
    if per_volume and style.density_unit is not None:
        arr = {"ctm_Nm": "ctm_Nm_per_cm3", "radial_pull_N": "radial_pull_N_per_cm3",
               "mass_kg": "mass_g_per_cm3"}[name]
        return arr, 1.0, style.density_unit, True
    return name, style.raw_scale, style.unit, False


def _colour_spec(values, name: str, percentile: float):
    """(cmap, clim, signed) for continuous values: symmetric limits about zero when signed."""
    style = FIELD_STYLES[name]
    v = np.asarray(values, float)
    v = v[np.isfinite(v)]
    lo, hi = (float(v.min()), float(v.max())) if v.size else (0.0, 1.0)
    signed = style.signed == "yes" or (style.signed == "auto" and lo < 0.0 < hi)
    if signed:
        m = float(np.percentile(np.abs(v), percentile)) if v.size else 1.0
        m = m if m > 0 else 1.0
        return SIGNED_CMAP, (-m, m), True
    if percentile < 100.0 and v.size:
        lo, hi = float(np.percentile(v, 100.0 - percentile)), float(np.percentile(v, percentile))
    if lo >= 0.0:
        lo = 0.0  # contributions: colour in proportion to the value (a uniform field reads as such)
    if hi <= lo:
        hi = lo + (abs(lo) or 1.0) * 1e-6
    return UNSIGNED_CMAP, (lo, hi), False


def _axis_ends(frame: HubFrame, points):
    """End points of the drawn pitch axis (hub centre to just past the tip) and rotation
    axis (a little beyond the blade's extent along k) for the blade's ``points`` (n, 3)."""
    P, e, k = frame.P, frame.e, frame.k
    b = np.asarray(points)
    span = float(b[:, 1].max())
    h = max(0.75 * float(np.abs(b @ k).max()), 0.04 * span)
    return (P - (P @ e) * e, P + (1.14 * span - P @ e) * e), (-h * k, h * k)


def _scene_points(frame: HubFrame, surface):
    """Points that must be in the picture: the blade and the ends of the drawn axes."""
    b = np.asarray(surface.points)
    (a0, a1), (r0, r1) = _axis_ends(frame, b)
    pad = a0 - 0.06 * float(b[:, 1].max()) * frame.e  # room for the label at the hub centre
    return np.vstack([b, a0, a1, r0, r1, pad])


def _label(pl, cam: _Camera, point, text: str, fs: int, color: str, offset_px=(0.0, 0.0),
           halign: str = "left", valign: str = "bottom"):
    """A 2-D text label anchored at a 3-D point (drawn over everything), offset in pixels."""
    p = cam.front(point) + cam.per_pixel * (offset_px[0] * cam.right + offset_px[1] * cam.up)
    pl.add_point_labels(np.array([p]), [text], font_size=fs, text_color=color, shape=None, show_points=False,
                        always_visible=True, bold=False, justification_horizontal=halign,
                        justification_vertical=valign)


def _line_label(pl, cam: _Camera, a, b, text, fs, color):
    """Label just above the line a→b, ending at (or starting from) its end b."""
    u = np.asarray(b) - np.asarray(a)
    sx, sy = u @ cam.right, u @ cam.up
    n = math.hypot(sx, sy) or 1.0
    nx, ny = -sy / n, sx / n
    if ny < 0:
        nx, ny = -nx, -ny
    _label(pl, cam, b, text, fs, color, offset_px=(6 * nx, 6 * ny), halign="right" if sx > 0 else "left",
           valign="bottom")


def _add_axes(pl, frame: HubFrame, surface, cam: _Camera, fs: int):
    """Pitch axis (along e through P) and rotation axis (along k through O) as thin chain
    lines drawn over the blade, or as a circle-and-dot / circle-and-cross when seen end-on."""
    (a0, a1), (r0, r1) = _axis_ends(frame, surface.points)
    dash = 16.0 * cam.per_pixel
    radius = 11.0 * cam.per_pixel
    rad_px = 11.0
    for (p0, p1), centre, name in (((a0, a1), frame.P, "pitch axis e"), ((r0, r1), np.zeros(3), "rotation axis k")):
        axis = (p1 - p0) / np.linalg.norm(p1 - p0)
        if abs(cam.d @ axis) > 0.97:
            for part in _end_on_symbol(cam.front(centre), axis, radius, toward_viewer=(cam.d @ axis) < 0):
                pl.add_mesh(part, color=AXIS_INK, line_width=1.6)
            _label(pl, cam, centre, name, fs, AXIS_INK, offset_px=(0, -rad_px - 4), halign="center",
                   valign="top")
        else:
            pl.add_mesh(_chain_line(cam.front(p0), cam.front(p1), dash), color=AXIS_INK, line_width=1.4,
                        opacity=0.9)
            _line_label(pl, cam, p0, p1, name, fs, AXIS_INK)


def _add_station(pl, blade, surface, cam: _Camera, fs: int, overlay: bool, session=None):
    """The reference station: the section outline where the plane normal to e at the
    reference radius cuts the blade, and the outline of that plane (unless seen face-on)."""
    import pyvista as pv

    frame = blade.frame
    e, P = frame.e, frame.P
    r = float(blade.reference_radius_m)
    foot = P + (r - P @ e) * e
    section = _memo(session, ("station", r), surface, lambda: surface.slice(normal=e, origin=foot))
    if section.n_points == 0:
        return
    cut = section.copy()
    if overlay:
        cut.points = cam.front(np.asarray(cut.points))
    pl.add_mesh(cut, color=STATION_INK, line_width=2.6)
    q = np.asarray(section.points)
    rel = q - foot
    u = rel[np.argmax(np.linalg.norm(rel, axis=1))]
    u = u - (u @ e) * e
    u /= np.linalg.norm(u)
    v = np.cross(e, u)
    hu = 1.12 * float(np.abs(rel @ u).max())
    hv = max(1.5 * float(np.abs(rel @ v).max()), 0.4 * hu)
    corners = np.array([foot + su * hu * u + sv * hv * v for su, sv in ((1, 1), (-1, 1), (-1, -1), (1, -1), (1, 1))])
    if abs(cam.d @ e) < 0.97:
        shown = cam.front(corners) if overlay else corners
        pl.add_mesh(pv.lines_from_points(shown), color=STATION_INK, line_width=1.0, opacity=0.7)
        anchor = corners[np.argmax(corners[:4] @ cam.up)]
    else:
        anchor = q[np.argmax(q @ cam.up)]
    centre_x = cam.focal @ cam.right
    right_side = anchor @ cam.right > centre_x
    _label(pl, cam, anchor, f"reference station r = {r:.3f} m", fs, STATION_INK, offset_px=(0, 6),
           halign="right" if right_side else "left", valign="bottom")


def _add_field_mesh(pl, mesh, grid_name, name, clim_info, fs, scalar_title, show_bar=True, bar_pos=None,
                    category_texts=None, bottom: float = 0.0):
    """Add a mesh coloured by a per-element field; categorical fields get a labelled key
    (``category_texts`` replaces the key's labels, e.g. with each region's share). The
    default colour bar and key stand ``bottom`` (a fraction of the height) higher, above the
    caution footer."""
    style = FIELD_STYLES[name]
    common = dict(ambient=0.5, diffuse=0.55, specular=0.03, smooth_shading=False)
    if style.categories is not None:
        cats = style.categories
        if name == "region":
            colors = [REGION_COLORS[n] for n in REGIONS]
            texts = list(REGIONS)
        else:
            colors = [BAND_COLORS[c] for c in cats]
            texts = [BAND_LABELS[c] for c in cats]
        if category_texts is not None:
            texts = list(category_texts)
        values = np.asarray(mesh.cell_data[grid_name])
        idx = np.searchsorted(np.array(cats), values)
        mesh.cell_data["_category"] = idx.astype(float)
        from matplotlib.colors import ListedColormap

        bar = dict(title=style.label[:1].upper() + style.label[1:], n_labels=0, title_font_size=fs,
                   label_font_size=_pt(fs, 0.87), color=INK, vertical=True, width=0.045,
                   height=0.065 * len(cats), position_x=0.8, position_y=bottom + 0.12, fmt="")
        if bar_pos:
            bar.update(bar_pos)
        pl.add_mesh(mesh, scalars="_category", cmap=ListedColormap(colors), clim=(-0.5, len(cats) - 0.5),
                    n_colors=len(cats), show_scalar_bar=show_bar, scalar_bar_args=bar, preference="cell",
                    annotations={float(i): t for i, t in enumerate(texts)}, **common)
        return
    cmap, clim, _ = clim_info
    bar = dict(n_labels=5, fmt="%.3g", label_font_size=_pt(fs, 1.07), position_x=0.28, position_y=bottom + 0.03,
               height=0.075)
    bar.update(bar_pos or {})
    _colour_bar_args = _horizontal_bar(pl, scalar_title, fs, bar, show_bar)
    pl.add_mesh(mesh, scalars=grid_name, cmap=cmap, clim=clim, show_scalar_bar=show_bar,
                scalar_bar_args=_colour_bar_args, preference="cell", **common)


def _horizontal_bar(pl, caption: str, fs: int, args: dict, show: bool) -> dict:
    """Arguments of a horizontal colour bar, with its caption (title and unit) as a separate
    centred text just above it, so the caption never overlaps the tick labels."""
    out = dict(title="", color=INK, vertical=False, width=0.44, title_font_size=fs, unconstrained_font_size=True)
    out.update(args)
    if show and caption:
        actor = pl.add_text(caption, position=(0, 0), font_size=_pt(fs, 0.87), color=INK)
        actor.GetTextProperty().SetJustificationToCentered()
        coord = actor.GetPositionCoordinate()
        coord.SetCoordinateSystemToNormalizedViewport()
        coord.SetValue(out["position_x"] + 0.5 * out["width"], out["position_y"] + out["height"] + 0.004)
    return out


def _edges(mesh, boundary=False):
    """Sharp edges (and open boundaries) of a surface, for a light outline."""
    return mesh.extract_feature_edges(boundary_edges=boundary, feature_angle=55, manifold_edges=False,
                                      non_manifold_edges=False)


def _sentence(text: str) -> str:
    return text[:1].upper() + text[1:]


def _bar_title(style: FieldStyle, label: str, unit: str, signed: bool, field_name: str) -> str:
    out = f"{_sentence(label)}, {unit}" if unit else _sentence(label)
    if signed and field_name == "ctm_Nm":
        out += "   (− toward fine, + toward coarse)"
    return out


def _title(pl, win, fs, line1: str, line2: str = ""):
    x = 0.015 * win[0]
    pl.add_text(line1, position=(x, win[1] - 0.05 * win[1] - fs), font_size=_pt(fs, 1.2), color=INK)
    if line2:
        pl.add_text(line2, position=(x, win[1] - 0.05 * win[1] - 2.9 * fs), font_size=_pt(fs, 0.8), color=INK)


def _subtitle(blade, fields: ElementFields) -> str:
    sense = "toward fine" if fields.totals.ctm_Nm < 0 else "toward coarse"
    n = f"{len(fields):,}".replace(",", " ")
    return (f"{blade.name}: solid CTM {fields.totals.ctm_Nm:.4g} N·m ({sense}), radial pull "
            f"{fields.totals.radial_pull_N / 1e3:.4g} kN, {n} elements")


def _prepare(grid, field_name, per_volume, percentile, mesh):
    """Display array on ``mesh`` (scaled copy when needed), colour spec and titles."""
    if field_name not in FIELD_STYLES:
        raise ValueError(f"unknown field {field_name!r}; expected one of {', '.join(FIELD_STYLES)}")
    arr, scale, unit, dens = _field_values(grid, field_name, per_volume)
    style = FIELD_STYLES[field_name]
    if scale != 1.0:
        mesh.cell_data[arr + "_shown"] = np.asarray(mesh.cell_data[arr]) * scale
        arr = arr + "_shown"
    if style.categories is not None or field_name == "body":
        label = style.label
    else:
        label = style.label + (" per volume" if dens else " per element")
    info, bar_title = None, ""
    if style.categories is None:
        info = _colour_spec(mesh.cell_data[arr], field_name, percentile)
        bar_title = _bar_title(style, label, unit, info[2], field_name)
    return arr, style, label, info, bar_title


# --- field renders ---------------------------------------------------------------------------


def render_field(blade, fields: ElementFields, field_name: str, path, view: str = "planform", *,
                 per_volume: bool = True, percentile: float = 100.0, hotspots: HotSpots | None = None,
                 grid=None, window_size=WINDOW, title: str | None = None, force: bool = False,
                 session: RenderSession | None = None) -> str | None:
    """Render the blade coloured by one per-element field and write a PNG (``path`` None:
    open an interactive window instead, which needs a display — see :func:`has_display`;
    ``path`` may also be a binary file object). Every picture and window carries the caution.

    field_name : ``ctm_Nm``, ``radial_pull_N``, ``mass_kg``, ``volume_m3``, ``ctm_share_band``,
      ``pull_share_band``, ``region`` or ``body``
    view : ``planform`` (from the front, looking along −k, leading edge up), ``tip`` (looking
      inboard along −e, forward up), ``iso``, or ``aft`` (from behind, looking along +k)
    per_volume : colour contributions per cm³ of element (default) instead of raw per element
    percentile : colour limits from this percentile of |value| (signed) or of the values
      (unsigned); 100 uses the extremes
    grid : an :func:`element_grid` to reuse (built when None)
    session : a :class:`RenderSession` to draw in (a new plotter when None)
    Returns the path written. The surface shows the elements that touch it.
    """
    if grid is None:
        grid = element_grid(blade, fields, hotspots)
    surface = _memo(session, ("surface",), grid, lambda: grid.extract_surface(algorithm="dataset_surface"))
    arr, style, label, info, bar_title = _prepare(grid, field_name, per_volume, percentile, surface)
    win = tuple(window_size)
    fs = _font(win, 15)
    foot = footer_fraction(win)
    d, up = _view_basis(blade.frame, view)
    categorical = style.categories is not None
    top = 1.0 - (0.07 + 3.4 * fs / win[1])
    cam = _fit_camera(_scene_points(blade.frame, surface), d, up, win,
                      band=(foot + (0.05 if categorical else 0.16), top),
                      hband=(0.0, 0.8) if categorical else (0.0, 1.0))
    pl = _plotter(win, interactive=path is None, session=session)
    texts = None
    if field_name == "region" and hotspots is not None:
        # the hot-spot shares on the picture itself, beside each region's colour
        rows = {row["region"]: row for row in hotspots.table}
        texts = [f"{n}: {rows[n]['ctm_pct']:.1f} % of CTM, {rows[n]['radial_pull_pct']:.1f} % of pull"
                 if n in rows else n for n in REGIONS]
    _add_field_mesh(pl, surface, arr, field_name, info, fs, bar_title, category_texts=texts, bottom=foot)
    pl.add_mesh(_memo(session, ("edges",), surface, lambda: _edges(surface)), color=INK, line_width=1.0,
                opacity=0.5)
    _add_axes(pl, blade.frame, surface, cam, _pt(fs, 0.87))
    _add_station(pl, blade, surface, cam, _pt(fs, 0.87), overlay=view in ("planform", "aft", "tip"),
                 session=session)
    _title(pl, win, fs, f"{_sentence(title or label)} — {fields.rpm:g} rpm, blade angle {fields.blade_angle_deg:.1f}°",
           _subtitle(blade, fields) + f"  ·  view: {view}")
    add_caution(pl)
    cam.apply(pl)
    return _finish(pl, path, force, session)


def render_clipped(blade, fields: ElementFields, field_name: str, stations, path, *, per_volume: bool = True,
                   percentile: float = 100.0, hotspots: HotSpots | None = None, grid=None,
                   window_size=WINDOW, force: bool = False, session: RenderSession | None = None) -> str:
    """The blade cut at ``stations`` (radii along e, m) showing the element field inside.

    Top: the blade split by planes normal to e at the stations, the pieces drawn a little
    apart so the cut faces show. Bottom: each cut face seen from the tip (looking inboard
    along −e), all at the same scale, with the leading and trailing edges named and the
    pitch axis marked (circle and dot). Cut faces are the element cells sliced by the planes,
    each coloured by its element's value; colours are shared by all panels. A third, thin
    row across the whole width carries the caution. ``session``: as :func:`render_field`.
    """
    from .frame import chord_line

    stations = sorted(float(r) for r in np.atleast_1d(stations))
    if not stations:
        raise ValueError("render_clipped needs at least one station radius")
    if grid is None:
        grid = element_grid(blade, fields, hotspots)
    frame = blade.frame
    e, P = frame.e, frame.P
    y = np.asarray(grid.points)[:, 1]
    lo, hi = float(y.min()), float(y.max())
    bad = [r for r in stations if not lo < r < hi]
    if bad:
        raise ValueError(f"stations {bad} lie outside the blade (radii {lo:.4g} m to {hi:.4g} m)")
    grid = grid.copy(deep=False)
    arr, style, label, info, bar_title = _prepare(grid, field_name, per_volume, percentile, grid)
    win = tuple(window_size)
    fs = _font(win, 15)
    n = len(stations)
    top_h = 0.58
    foot = footer_fraction(win)
    pl = _plotter(win, shape=(3, n), groups=[(0, np.s_[:]), (2, np.s_[:])],
                  row_weights=[top_h, 1 - top_h - foot, foot], session=session)
    # top: exploded pieces
    pl.subplot(0, 0)
    gap = 0.04 * (hi - lo)
    cuts = [lo - 1.0] + stations + [hi + 1.0]
    pieces = []
    for i in range(n + 1):
        piece = grid.clip(normal=e, origin=P + (cuts[i] - P @ e) * e, invert=False)
        piece = piece.clip(normal=e, origin=P + (cuts[i + 1] - P @ e) * e, invert=True)
        if piece.n_cells:
            surf = piece.extract_surface(algorithm="dataset_surface")
            surf.translate(i * gap * e, inplace=True)
            pieces.append(surf)
    d, up = _view_basis(frame, "cutaway")
    top_win = (win[0], win[1] * top_h)
    categorical = style.categories is not None
    cam = _fit_camera(np.vstack([np.asarray(p.points) for p in pieces]), d, up, top_win,
                      band=(0.12 if categorical else 0.25, 1.0 - (0.06 + 2.4 * fs / top_win[1])),
                      hband=(0.0, 0.8) if categorical else (0.0, 1.0))
    for j, surf in enumerate(pieces):
        bar_pos = (dict(position_x=0.9, position_y=0.15, height=0.7) if categorical
                   else dict(position_y=0.04, height=0.1))
        _add_field_mesh(pl, surf, arr, field_name, info, fs, bar_title, show_bar=(j == 0), bar_pos=bar_pos)
    for i, r in enumerate(stations):
        q = np.asarray(grid.slice(normal=e, origin=P + (r - P @ e) * e).points) + (i + 0.5) * gap * e
        if len(q):
            _label(pl, cam, q[np.argmax(q @ cam.up)], f"r = {r:.3f} m", _pt(fs, 0.87), INK, offset_px=(0, 8),
                   halign="center", valign="bottom")
    pl.add_text(f"{_sentence(label)} inside the blade — {fields.rpm:g} rpm, blade angle "
                f"{fields.blade_angle_deg:.1f}°", position="upper_left", font_size=_pt(fs, 1.13), color=INK)
    cam.apply(pl)
    # bottom: the cut faces, face-on, one common scale
    faces = [grid.slice(normal=e, origin=P + (r - P @ e) * e) for r in stations]
    d2, up2 = _view_basis(frame, "tip")
    right2 = np.cross(d2, up2)
    hx = hy = 0.0
    for f in faces:
        if f.n_points:
            q = np.asarray(f.points)
            hx, hy = max(hx, 0.5 * float(np.ptp(q @ right2))), max(hy, 0.5 * float(np.ptp(q @ up2)))
    panel = (win[0] / n, win[1] * (1 - top_h - foot))
    for i, (f, r) in enumerate(zip(faces, stations)):
        pl.subplot(1, i)
        pl.add_text(f"r = {r:.3f} m  ({r / hi:.2f} of the tip radius)", position="upper_left",
                    font_size=_pt(fs, 0.73), color=INK)
        if f.n_points == 0:
            continue
        q = np.asarray(f.points)
        mid = 0.5 * (q.max(axis=0) + q.min(axis=0))
        box = np.array([mid + sx * 1.25 * hx * right2 + sy * 1.5 * hy * up2 for sx in (-1, 1) for sy in (-1, 1)])
        cam2 = _fit_camera(np.vstack([box, q]), d2, up2, panel, band=(0.0, 0.86), margin=1.0)
        _add_field_mesh(pl, f, arr, field_name, info, fs, bar_title, show_bar=False)
        pl.add_mesh(_edges(f, boundary=True), color=INK, line_width=1.2)
        foot = P + (r - P @ e) * e
        for part in _end_on_symbol(cam2.front(foot), e, 9.0 * cam2.per_pixel, toward_viewer=True):
            pl.add_mesh(part, color=AXIS_INK, line_width=1.4)
        le, te = chord_line(q, frame)
        for pt, name in ((le, "LE"), (te, "TE")):
            sx = (pt - mid) @ right2
            _label(pl, cam2, pt, name, _pt(fs, 0.73), AXIS_INK, offset_px=(6 if sx > 0 else -6, 0),
                   halign="left" if sx > 0 else "right", valign="center")
        cam2.apply(pl)
    pl.subplot(2, 0)
    add_caution(pl)
    return _finish(pl, path, force, session)


def render_deviation(vertices, faces, values, path, *, frame: HubFrame | None = None, view: str = "planform",
                     title: str = "Surface deviation", limit_mm: float | None = None, percentile: float = 100.0,
                     sign_note: str = "+ material added, − removed", window_size=WINDOW,
                     force: bool = False, session: RenderSession | None = None) -> str:
    """Render a signed per-vertex surface deviation (compare) and write a PNG.

    vertices : (n, 3) m, hub frame;  faces : (m, 3) int;  values : (n,) signed deviation, m
    (sign as the caller defines it; compare: + material added relative to the reference)
    limit_mm : symmetric colour limit ±limit (default: the ``percentile`` of |deviation|)
    sign_note : what the signs mean, shown beside the unit in the colour-bar caption
    view : as :func:`render_field`, in the given hub ``frame`` (default identity)
    session : as :func:`render_field`. The picture carries the caution.
    """
    import pyvista as pv

    v = np.asarray(vertices, dtype=float)
    f = np.asarray(faces, dtype=np.int64)
    dev = np.asarray(values, dtype=float).reshape(-1)
    if dev.shape[0] != v.shape[0]:
        raise ValueError(f"render_deviation: {dev.shape[0]} values for {v.shape[0]} vertices; give one per vertex")
    frame = frame or hub_frame()
    mesh = pv.PolyData(v, np.hstack([np.full((len(f), 1), 3, dtype=np.int64), f]).ravel())
    mm = dev * 1e3
    mesh.point_data["deviation_mm"] = mm
    finite = np.abs(mm[np.isfinite(mm)])
    m = float(limit_mm) if limit_mm is not None else (float(np.percentile(finite, percentile)) if finite.size else 1.0)
    m = m if m > 0 else 1e-3
    win = tuple(window_size)
    fs = _font(win, 15)
    foot = footer_fraction(win)
    d, up = _view_basis(frame, view)
    top = 1.0 - (0.07 + 3.4 * fs / win[1])
    cam = _fit_camera(v, d, up, win, band=(foot + 0.16, top))
    pl = _plotter(win, session=session)
    bar = _horizontal_bar(pl, "Deviation, mm" + (f"   ({sign_note})" if sign_note else ""), fs,
                          dict(n_labels=5, fmt="%.3g", label_font_size=_pt(fs, 1.07), position_x=0.28,
                               position_y=foot + 0.03, height=0.075), True)
    pl.add_mesh(mesh, scalars="deviation_mm", cmap=DEVIATION_CMAP, clim=(-m, m), scalar_bar_args=bar,
                smooth_shading=True, ambient=0.42, diffuse=0.62, specular=0.04)
    pl.add_mesh(_edges(mesh), color=INK, line_width=1.0, opacity=0.5)
    peak = float(finite.max()) if finite.size else 0.0
    _title(pl, win, fs, title, f"largest magnitude {peak:.3g} mm  ·  colour limit ±{m:.3g} mm  ·  view: {view}")
    add_caution(pl)
    cam.apply(pl)
    return _finish(pl, path, force, session)


# --- matplotlib plots ----------------------------------------------------------------------------

PLOT_COLORS = {"ctm": "#5e3c99", "stiffness": "#b35806", "pull": "#1b6f7a", "mass": "#0072B2",
               "radial_pull": "#009E73", "ctm_share": "#D55E00", "grid": "#d9d9d4", "ink": INK}


def _figure(size=(9.0, 6.0)):
    from matplotlib.figure import Figure

    return Figure(figsize=size, dpi=PICTURE_DPI, facecolor="white", layout="constrained")


def _num(x: float, fmt: str = ".4g") -> str:
    """A number for a label, with a true minus sign."""
    return format(float(x), fmt).replace("-", "−")


def _style_axes(ax):
    ax.set_facecolor("#fbfbf9")
    ax.grid(True, color=PLOT_COLORS["grid"], linewidth=0.7)
    ax.set_axisbelow(True)
    for s in ("top", "right"):
        ax.spines[s].set_visible(False)
    for s in ("left", "bottom"):
        ax.spines[s].set_color("#8a8a85")
    ax.tick_params(colors=INK, labelsize=9)
    ax.yaxis.label.set_color(INK)
    ax.xaxis.label.set_color(INK)


def _save_figure(fig, path, force, above: str = ""):
    """Add the caution footer (and ``above`` it, a note) and save the figure: a PNG (or the
    format of the path's extension), or PNG bytes into a binary file object.

    A PNG is drawn once: one draw lays the figure out and renders it, and the rendered
    buffer is encoded directly (a plain ``savefig`` with a layout engine draws twice).
    """
    add_caution(fig, above=above)
    fmt = "png" if hasattr(path, "write") else os.path.splitext(os.fspath(path))[1].lstrip(".").lower() or "png"
    if fmt != "png":
        with staged_file(path, force) as tmp:
            fig.savefig(tmp, format=fmt)
        return os.fspath(path)
    return _deliver(figure_png(fig), path, force)


def figure_png(fig) -> bytes:
    """A matplotlib figure drawn once (Agg, its layout engine included) as PNG bytes."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    canvas = FigureCanvasAgg(fig)
    canvas.draw()
    rgba = np.asarray(canvas.buffer_rgba())
    return png_bytes(rgba[..., :3] if np.all(rgba[..., 3] == 255) else rgba, dpi=fig.dpi)


def zero_crossings(x, y) -> list[float]:
    """x where the sampled y changes sign (linear between samples).

    >>> zero_crossings([0.0, 1.0, 2.0], [-1.0, 1.0, 3.0])
    [0.5]
    """
    x, y = np.asarray(x, float), np.asarray(y, float)
    out = []
    for i in range(len(x) - 1):
        if y[i] == 0.0:
            out.append(float(x[i]))
        elif y[i] * y[i + 1] < 0:
            out.append(float(x[i] - y[i] * (x[i + 1] - x[i]) / (y[i + 1] - y[i])))
    return out


def plot_ctm_sweep(betas, ctm, stiffness, operating_deg, path, title: str = "", *, force: bool = False) -> str:
    """CTM (N·m) and centrifugal pitch stiffness (N·m/rad) against blade angle (deg).

    The operating blade angle is marked by a vertical line in both panels; the CTM panel has
    its zero line and marks the blade angles where the CTM changes sign.
    """
    betas, ctm, stiffness = (np.asarray(a, float) for a in (betas, ctm, stiffness))
    fig = _figure((9.0, 6.4))
    ax1, ax2 = fig.subplots(2, 1, sharex=True, gridspec_kw=dict(height_ratios=[3, 2], hspace=0.08))
    for ax in (ax1, ax2):
        _style_axes(ax)
    ax1.axhline(0.0, color=INK, linewidth=0.9)
    ax1.fill_between(betas, ctm, 0.0, where=ctm < 0, color="#fdb863", alpha=0.35, linewidth=0,
                     label="toward fine")
    ax1.fill_between(betas, ctm, 0.0, where=ctm > 0, color="#b2abd2", alpha=0.45, linewidth=0,
                     label="toward coarse")
    ax1.plot(betas, ctm, color=PLOT_COLORS["ctm"], linewidth=2.0)
    ax1.set_ylabel("CTM, N·m\n(+ toward coarse)")
    ax2.axhline(0.0, color=INK, linewidth=0.9)
    ax2.plot(betas, stiffness, color=PLOT_COLORS["stiffness"], linewidth=2.0)
    ax2.set_ylabel("pitch stiffness\n−dCTM/dβ, N·m/rad")
    ax2.set_xlabel("blade angle β, deg")
    for z in zero_crossings(betas, ctm):
        ax1.plot([z], [0.0], marker="o", markersize=5, color=PLOT_COLORS["ctm"], markerfacecolor="white")
        ax1.annotate(f"CTM = 0 at {_num(z, '.1f')}°", (z, 0.0), textcoords="offset points", xytext=(-6, 8),
                     ha="right", fontsize=8, color=INK)
    if operating_deg is not None:
        op = float(operating_deg)
        c_op = float(np.interp(op, betas, ctm))
        for ax in (ax1, ax2):
            ax.axvline(op, color="#6b6b66", linewidth=1.2, linestyle=(0, (6, 3)))
        k_op = float(np.interp(op, betas, stiffness))
        ax1.annotate(f"operating {op:.1f}°\nCTM {_num(c_op)} N·m", (op, c_op), textcoords="offset points",
                     xytext=(8, 10), fontsize=8.5, color=INK,
                     bbox=dict(boxstyle="round,pad=0.25", facecolor="white", edgecolor="#b5b5b0", linewidth=0.6))
        ax1.plot([op], [c_op], marker="o", markersize=5, color=INK)
        ax2.plot([op], [k_op], marker="o", markersize=5, color=INK)
        ax2.annotate(f"{_num(k_op)} N·m/rad", (op, k_op), textcoords="offset points", xytext=(8, 6),
                     fontsize=8.5, color=INK)
    ax1.legend(loc="best", fontsize=8, frameon=False)
    ax1.set_xlim(float(betas.min()), float(betas.max()))
    fig.suptitle(title or "Centrifugal twisting moment over the blade-angle range", fontsize=12, color=INK,
                 x=0.02, ha="left")
    return _save_figure(fig, path, force)


def plot_rpm_sweep(rpms, ctm, radial_pull, path, title: str = "", *, operating_rpm: float | None = None,
                   force: bool = False) -> str:
    """Radial pull (kN) and CTM (N·m) against speed (rpm), both ∝ rpm²."""
    rpms, ctm, pull = (np.asarray(a, float) for a in (rpms, ctm, radial_pull))
    fig = _figure((9.0, 6.0))
    ax1, ax2 = fig.subplots(2, 1, sharex=True, gridspec_kw=dict(hspace=0.08))
    for ax in (ax1, ax2):
        _style_axes(ax)
    ax1.plot(rpms, pull / 1e3, color=PLOT_COLORS["pull"], linewidth=2.0, marker="o", markersize=3)
    ax1.set_ylabel("radial pull, kN")
    ax2.axhline(0.0, color=INK, linewidth=0.9)
    ax2.plot(rpms, ctm, color=PLOT_COLORS["ctm"], linewidth=2.0, marker="o", markersize=3)
    ax2.set_ylabel("CTM, N·m\n(+ toward coarse)")
    ax2.set_xlabel("speed, rpm")
    if operating_rpm is not None:
        w = float(operating_rpm)
        for ax in (ax1, ax2):
            ax.axvline(w, color="#6b6b66", linewidth=1.2, linestyle=(0, (6, 3)))
        if rpms.min() <= w <= rpms.max():
            # both loads grow as rpm², so interpolating in rpm² is exact between samples
            p_op = float(np.interp(w * w, rpms * rpms, pull)) / 1e3
            c_op = float(np.interp(w * w, rpms * rpms, ctm))
            ax1.plot([w], [p_op], marker="o", markersize=5, color=INK)
            ax2.plot([w], [c_op], marker="o", markersize=5, color=INK)
            box = dict(boxstyle="round,pad=0.25", facecolor="white", edgecolor="#b5b5b0", linewidth=0.6)
            ax1.annotate(f"operating {w:g} rpm\n{_num(p_op)} kN", (w, p_op), textcoords="offset points",
                         xytext=(-10, 4), ha="right", fontsize=8.5, color=INK, bbox=box)
            ax2.annotate(f"{_num(c_op)} N·m", (w, c_op), textcoords="offset points", xytext=(-10, 4),
                         ha="right", fontsize=8.5, color=INK, bbox=box)
    ax1.set_ylim(bottom=min(0.0, float(np.min(pull)) / 1e3))
    fig.suptitle(title or "Centrifugal loads against speed", fontsize=12, color=INK, x=0.02, ha="left")
    return _save_figure(fig, path, force)


def plot_hot_spots(hotspots: HotSpots, path, title: str = "", *, force: bool = False) -> str:
    """Bar chart: each region's share (%) of the solid's mass, radial pull and CTM."""
    names = list(hotspots.names)
    cols = [("mass_pct", "mass", PLOT_COLORS["mass"]), ("radial_pull_pct", "radial pull", PLOT_COLORS["radial_pull"]),
            ("ctm_pct", "CTM", PLOT_COLORS["ctm_share"])]
    fig = _figure((9.0, 5.6))
    ax = fig.subplots()
    _style_axes(ax)
    ax.grid(True, axis="x", color=PLOT_COLORS["grid"], linewidth=0.7)
    ax.grid(False, axis="y")
    n = len(names)
    h = 0.26
    ypos = np.arange(n)[::-1].astype(float)
    vals_all = []
    for j, (col, lab, colr) in enumerate(cols):
        vals = np.nan_to_num(hotspots.share_pct(col))
        vals_all.append(vals)
        yy = ypos + (1 - j) * h
        ax.barh(yy, vals, height=h * 0.92, color=colr, label=lab)
        for yv, v in zip(yy, vals):
            ax.annotate(f"{v:.1f} %", (v, yv), textcoords="offset points", xytext=(3 if v >= 0 else -3, 0),
                        ha="left" if v >= 0 else "right", va="center", fontsize=7.5, color=INK)
    va = np.concatenate(vals_all)
    ax.axvline(0.0, color=INK, linewidth=0.9)
    ax.set_xlim(min(0.0, float(va.min())) * 1.15 - 1.0, max(0.0, float(va.max())) * 1.15 + 4.0)
    ax.set_yticks(ypos, names)
    ax.set_xlabel("share of the solid's total, %  (signed; each quantity sums to 100 %)")
    ax.legend(loc="lower right", fontsize=8.5, frameon=False)
    fig.suptitle(title or f"Where the loads come from — {hotspots.rpm:g} rpm, blade angle {hotspots.blade_angle_deg:.1f}°",
                 fontsize=12, color=INK, x=0.02, ha="left")
    defs = hotspots.definitions()
    return _save_figure(fig, path, force, above="\n".join(f"{k}: {v}" for k, v in defs.items()))


def plot_match(match: dict, path, title: str = "", *, force: bool = False) -> str:
    """The hub seen from the front for the best and the worst assignment of a blade set.

    match : the ``match`` section of a report (:func:`bladesolid.compare.match_section`).
    Each blade is a spoke at its position's clocking angle, labelled with its number and
    static moment (kg·mm); the residual static imbalance is drawn as an arrow from the hub
    centre, magnified so that it can be seen, with its value in kg·mm and N at the set's rpm.
    """
    fig = _figure((10.0, 5.2))
    axes = fig.subplots(1, 2)
    blades = {b["blade"]: b for b in match["blades"]}
    worst_kgm = max(match["worst"]["imbalance_kgm"], 1e-30)
    for ax, label in zip(axes, ("best", "worst")):
        a = match[label]
        ax.set_aspect("equal")
        ax.axis("off")
        ax.add_patch(_circle((0.0, 0.0), 0.18, "#d9dcd4"))
        for p in a["positions"]:
            th = np.radians(90.0 + p["clocking_deg"])  # position 1 at twelve o'clock
            b = blades[p["blade"]]
            ax.plot([0.18 * np.cos(th), np.cos(th)], [0.18 * np.sin(th), np.sin(th)], color=INK, lw=3.0,
                    solid_capstyle="round")
            c, s = np.cos(th), np.sin(th)
            ax.text(1.06 * c, 1.06 * s + (0.08 if s > 0.3 else -0.08 if s < -0.3 else 0.0),
                    f"pos {p['position']}: blade {p['blade']}\n{_num(b['static_moment_kgm'] * 1e3, '.6g')} kg·mm",
                    ha="left" if c > 0.3 else "right" if c < -0.3 else "center",
                    va="bottom" if s > 0.3 else "top" if s < -0.3 else "center", fontsize=8, color=INK)
        # the residual, magnified: the worst assignment's residual is drawn 0.8 long
        r = a["imbalance_kgm"]
        d = np.radians(a.get("imbalance_direction_deg", 0.0))  # measured from x (to the right) about k
        length = 0.8 * r / worst_kgm
        if length > 1e-3:
            ax.annotate("", xy=(length * np.cos(d), length * np.sin(d)), xytext=(0.0, 0.0),
                        arrowprops=dict(arrowstyle="-|>", color=PLOT_COLORS["stiffness"], lw=2.0))
        ax.set_xlim(-1.9, 1.9)
        ax.set_ylim(-1.5, 1.5)
        ax.set_title(f"{label} assignment: residual {_num(r * 1e3)} kg·mm = {_num(a['imbalance_force_N'])} N "
                     f"at {_num(match['rpm'])} rpm", fontsize=9, color=INK)
    fig.suptitle((title or "Blade set on the hub") + " — seen from the front; arrow: residual static imbalance "
                 "(drawn to scale between the two)", fontsize=10, color=INK)
    return _save_figure(fig, path, force)


def _circle(centre, radius, color):
    from matplotlib.patches import Circle

    return Circle(centre, radius, color=color, zorder=0)
