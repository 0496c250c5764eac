"""The safety caution travels with every result: pictures (plots, renders, the interactive
window), CSV tables, the VTU element file, the HTML page and every output folder.

Legibility: the footer must be at least 8 pt at the picture's saved size (8 pt as the smallest
legible print size: common practice, no source). A PNG states its resolution (pHYs); points
are 1/72 in.
"""

from __future__ import annotations

import csv
import html
import io
from html.parser import HTMLParser

import numpy as np
import pytest

from bladesolid import CAUTION, api, report, views
from bladesolid.fields import element_fields, hot_spots
from bladesolid.safefile import CAUTION_FILE, staged_folder, write_caution_file

pytest.importorskip("pyvista")

SMALL = (480, 320)
RPM = 2500.0
MIN_PT = 8.0


def same_words(text: str) -> bool:
    """The text is the caution, wrapped onto any number of lines."""
    return " ".join(str(text).split()) == CAUTION


@pytest.fixture(scope="module")
def demo(demo_path):
    return api.load_blade(demo_path, "mm", ["2810 kg/m^3"])


@pytest.fixture(scope="module")
def state(demo):
    f = element_fields(demo, RPM, 25.0)
    h = hot_spots(demo, f)
    return f, h, views.element_grid(demo, f, h)


@pytest.fixture
def spy(monkeypatch):
    """Every call of views.add_caution: (kind, the artist or actor it added)."""
    calls = []
    real = views.add_caution

    def wrapper(target, **kw):
        out = real(target, **kw)
        calls.append(("figure" if hasattr(target, "savefig") else "plotter", out))
        return out

    monkeypatch.setattr(views, "add_caution", wrapper)
    return calls


def assert_legible_footer(calls, kind):
    assert [c[0] for c in calls] == [kind], calls
    artist = calls[0][1]
    if kind == "figure":
        assert same_words(artist.get_text())
        assert artist.get_fontsize() >= MIN_PT  # matplotlib sizes are points at any dpi
    else:
        assert same_words(artist.GetInput())
        # VTK font sizes are points at the window's 72 dpi, i.e. pixels; the PNG is marked PICTURE_DPI
        assert artist.GetTextProperty().GetFontSize() * 72.0 / views.PICTURE_DPI >= MIN_PT


# --- every picture function ----------------------------------------------------------------------


def test_plots_carry_the_footer(demo, state, spy):
    f, h, _ = state
    betas, ctm, k = api.pitch_sweep(demo, RPM, -10, 90, 5)
    calls = {
        "ctm sweep": lambda out: views.plot_ctm_sweep(betas, ctm, k, 25.0, out),
        "rpm sweep": lambda out: views.plot_rpm_sweep(np.array([0.0, 1000.0, 2500.0]), np.array([0.0, -40.0, -236.0]),
                                                      np.array([0.0, 3e4, 2e5]), out, operating_rpm=RPM),
        "hot spots": lambda out: views.plot_hot_spots(h, out),
        "match": lambda out: views.plot_match(_match_section(), out),
    }
    for name, draw in calls.items():
        spy.clear()
        buf = io.BytesIO()
        draw(buf)
        assert buf.getvalue()[:8] == b"\x89PNG\r\n\x1a\n", name
        assert_legible_footer(spy, "figure")


def test_spanwise_plot_carries_the_footer(tmp_path, demo, spy, footer_line):
    from bladesolid.span import plot_span, span_table

    plot_span(span_table(demo, RPM, 25.0, stations=4), tmp_path / "span.png")
    assert_legible_footer(spy, "figure")
    extent, dpi, marks = footer_line(tmp_path / "span.png")
    assert extent >= 0.85 * MIN_PT / 72.0 * dpi and marks > 30


@pytest.mark.parametrize("kind", ["field", "clipped", "deviation"])
def test_renders_carry_the_footer(demo, state, spy, kind):
    f, h, grid = state
    buf = io.BytesIO()
    if kind == "field":
        views.render_field(demo, f, "ctm_Nm", buf, grid=grid, window_size=SMALL)
    elif kind == "clipped":
        views.render_clipped(demo, f, "ctm_Nm", [0.5], buf, grid=grid, window_size=SMALL)
    else:
        v, faces = demo.surfaces[0]
        views.render_deviation(v, faces, 1e-3 * np.sin(v[:, 1] * 20), buf, window_size=SMALL)
    assert buf.getvalue()[:8] == b"\x89PNG\r\n\x1a\n"
    assert_legible_footer(spy, "plotter")


def test_interactive_window_carries_the_footer(demo, state, monkeypatch):
    import pyvista as pv

    shown = []
    monkeypatch.setattr(pv.Plotter, "show", lambda self, *a, **k: shown.append(self))
    f, h, grid = state
    assert views.render_field(demo, f, "mass_kg", None, grid=grid, window_size=SMALL) is None
    assert len(shown) == 1 and views.has_caution(shown[0])
    actor = shown[0].renderer.actors["caution"]
    assert same_words(actor.GetInput())
    shown[0].close()


def test_a_picture_without_the_footer_is_refused(monkeypatch, demo, state):
    # the last step of every render checks for the footer: a render that forgot it fails
    monkeypatch.setattr(views, "add_caution", lambda target, **kw: None)
    f, h, grid = state
    with pytest.raises(RuntimeError, match="caution"):
        views.render_field(demo, f, "ctm_Nm", io.BytesIO(), grid=grid, window_size=SMALL)


def test_footer_is_legible_at_the_saved_size(tmp_path, demo, state, footer_line):
    """Measured in the saved PNGs: the ink of the footer's last line (ascenders to descenders,
    about 0.93 of the font size for Arial and DejaVu Sans: font metrics, from memory) against
    8 pt at the resolution written in the file."""
    f, h, grid = state
    render = views.render_field(demo, f, "ctm_Nm", tmp_path / "r.png", grid=grid)
    plot = views.plot_hot_spots(h, tmp_path / "p.png")
    for path in (render, plot):
        extent, dpi, marks = footer_line(path)
        assert dpi == pytest.approx(views.PICTURE_DPI, abs=0.1)
        assert extent >= 0.85 * MIN_PT / 72.0 * dpi, (path, extent)
        assert marks > 30  # a line of text (letters and words), not a colour bar


def _match_section():
    pos = [{"position": i + 1, "clocking_deg": 120.0 * i, "blade": i + 1, "name": f"b{i}"} for i in range(3)]
    return {"rpm": RPM, "blades": [{"blade": i + 1, "name": f"b{i}", "static_moment_kgm": 1.0 + 0.01 * i}
                                   for i in range(3)],
            "best": {"positions": pos, "imbalance_kgm": 0.001, "imbalance_force_N": 70.0,
                     "imbalance_direction_deg": 30.0},
            "worst": {"positions": pos, "imbalance_kgm": 0.02, "imbalance_force_N": 1400.0,
                      "imbalance_direction_deg": 200.0}}


# --- one plotter for a series of renders ---------------------------------------------------------


def test_a_session_draws_each_picture_once_and_the_same(demo, state, monkeypatch):
    f, h, grid = state
    renders = []
    real = views._new_plotter

    def counted(*a, **k):
        pl = real(*a, **k)
        pl.render_window.AddObserver("StartEvent", lambda *_: renders.append(pl))
        return pl

    monkeypatch.setattr(views, "_new_plotter", counted)
    alone = io.BytesIO()
    views.render_field(demo, f, "ctm_Nm", alone, view="planform", grid=grid, window_size=SMALL)
    assert len(renders) == 1
    renders.clear()
    shared = io.BytesIO()
    with views.render_session() as s:
        views.render_field(demo, f, "mass_kg", io.BytesIO(), view="tip", grid=grid, window_size=SMALL, session=s)
        views.render_field(demo, f, "region", io.BytesIO(), view="iso", grid=grid, hotspots=h, window_size=SMALL,
                           session=s)
        views.render_field(demo, f, "ctm_Nm", shared, view="planform", grid=grid, window_size=SMALL, session=s)
    assert len(renders) == 3 and len({id(p) for p in renders}) == 1  # one plotter, one render per picture
    from PIL import Image

    a = np.asarray(Image.open(alone)).astype(int)
    b = np.asarray(Image.open(shared)).astype(int)
    # the third picture of a session is the picture drawn alone (nothing left from the others)
    assert a.shape == b.shape and np.abs(a - b).max() <= 2


# --- tables, element file, page, folders ---------------------------------------------------------


def test_csv_starts_with_the_caution_and_readers_skip_it():
    rows = [{"blade_angle_deg": 20.0, "ctm_Nm": -230.5}, {"blade_angle_deg": 25.0, "ctm_Nm": -244.7}]
    text = report.csv_text(rows)
    first, header = text.splitlines()[:2]
    assert first == "# " + CAUTION and header == "blade_angle_deg,ctm_Nm"
    assert report.csv_rows(text) == [{"blade_angle_deg": "20.0", "ctm_Nm": "-230.5"},
                                     {"blade_angle_deg": "25.0", "ctm_Nm": "-244.7"}]
    # the standard library's reader, skipping comment lines
    table = list(csv.DictReader(ln for ln in io.StringIO(text) if not ln.startswith("#")))
    assert [float(r["ctm_Nm"]) for r in table] == [-230.5, -244.7]
    # numpy, as documented in report.csv_text
    a = np.genfromtxt(io.StringIO(text), delimiter=",", names=True, skip_header=1)
    assert a.dtype.names == ("blade_angle_deg", "ctm_Nm") and list(a["ctm_Nm"]) == [-230.5, -244.7]
    assert report.csv_text(rows, caution=False).splitlines()[0] == "blade_angle_deg,ctm_Nm"
    assert report.csv_text([]) == "# " + CAUTION + "\n"  # even an empty table carries it


def test_vtu_carries_the_caution_and_stays_readable(tmp_path, state):
    import meshio
    import pyvista as pv

    f, h, grid = state
    path = tmp_path / "elements.vtu"
    views.write_vtu(grid, path)
    raw = path.read_bytes()
    assert raw.startswith(b'<?xml version="1.0"?>\n<!-- ' + CAUTION.encode() + b" -->\n<VTKFile")
    back = pv.read(path)
    assert bytes(np.asarray(back.field_data["caution"], dtype=np.uint8)).decode("utf-8") == CAUTION
    m = meshio.read(path)  # a VTK string array would make meshio give up on the whole file
    assert bytes(m.field_data["caution"].astype(np.uint8)).decode("utf-8") == CAUTION
    assert len(m.cells[0].data) == len(f)  # (bladesolid's own volume reader goes through meshio.vtu.read too)


class _Text(HTMLParser):
    def __init__(self):
        super().__init__()
        self.stack, self.by_tag = [], {}

    def handle_starttag(self, tag, attrs):
        self.stack.append(tag)

    def handle_endtag(self, tag):
        if self.stack:
            self.stack.pop()

    def handle_data(self, data):
        for tag in set(self.stack):
            self.by_tag.setdefault(tag, []).append(data)


def test_html_has_the_caution_at_the_top_and_in_the_footer():
    page = report.review_html({"caution": CAUTION, "input": {"name": "x"}})
    p = _Text()
    p.feed(page)
    assert CAUTION in " ".join(p.by_tag["footer"])
    assert page.index("Caution.") < page.index("</header>") + 200  # the top one, first thing in main
    assert page.count(html.escape(CAUTION)) == 2


def test_every_staged_folder_gets_caution_txt(tmp_path):
    with staged_folder(tmp_path / "out") as tmp:
        pass
    text = (tmp_path / "out" / CAUTION_FILE).read_text()
    assert text.startswith(CAUTION)
    # a folder whose block wrote its own keeps it
    with staged_folder(tmp_path / "own") as tmp:
        with open(f"{tmp}/{CAUTION_FILE}", "w") as fh:
            fh.write("custom")
    assert (tmp_path / "own" / CAUTION_FILE).read_text() == "custom"
    # folders written file by file
    (tmp_path / "plain").mkdir()
    write_caution_file(tmp_path / "plain")
    write_caution_file(tmp_path / "plain")  # again: replaced, not refused
    assert (tmp_path / "plain" / CAUTION_FILE).read_text().startswith(CAUTION)
