"""Renders, plots and the element file: written safely, not blank, every field present."""

import os

import numpy as np
import pytest

from bladesolid import api, views
from bladesolid.errors import OutputExistsError
from bladesolid.fields import REGIONS, element_fields, hot_spots

SMALL = (400, 300)
RPM = 2500.0


@pytest.fixture(scope="module")
def demo(demo_path):
    return api.load_blade(demo_path, "mm", ["2810 kg/m^3"])


@pytest.fixture(scope="module")
def state(demo):
    f = element_fields(demo, RPM, 25.0)
    h = hot_spots(demo, f)
    return f, h, views.element_grid(demo, f, h)


def pixels(path):
    from PIL import Image

    return np.asarray(Image.open(path).convert("RGB")).astype(int)


def background_fraction(img, colour="#f3f3f0", tol=10):
    bg = np.array([int(colour[i:i + 2], 16) for i in (1, 3, 5)])
    return float(np.mean(np.all(np.abs(img - bg) <= tol, axis=-1)))


def distinct_colours(img):
    return len(np.unique(img.reshape(-1, 3) // 8, axis=0))


def assert_not_blank(path, min_cover=0.04, min_colours=40):
    img = pixels(path)
    assert 1.0 - background_fraction(img) > min_cover, f"{path} is (nearly) all background"
    assert distinct_colours(img) > min_colours, f"{path} has too few colours"
    return img


def no_temp_files(folder):
    return not [n for n in os.listdir(folder) if n.startswith(".bladesolid-")]


# --- element grid and file ------------------------------------------------------------------


def test_element_grid_has_every_field_at_the_blade_angle(demo, state):
    f, h, grid = state
    assert grid.n_cells == len(f) and grid.n_points == len(demo.element_nodes)
    for name in ("mass_kg", "volume_m3", "radial_pull_N", "ctm_Nm", "ctm_share_band", "pull_share_band",
                 "region", "body", "chordwise", "ctm_Nm_per_cm3", "radial_pull_N_per_cm3", "mass_g_per_cm3"):
        assert name in grid.cell_data, name
    np.testing.assert_array_equal(grid.cell_data["ctm_Nm"], f.ctm_Nm)
    np.testing.assert_array_equal(grid.cell_data["region"], h.region)
    # nodes moved by the pitch motion: the cell centroids are the element centroids at 25°
    import pyvista as pv

    centres = np.asarray(grid.cell_centers().points)
    np.testing.assert_allclose(centres, f.centroid_m, atol=1e-12)
    assert set(np.unique(grid.celltypes).tolist()) == {int(pv.CellType.TETRA)}
    assert float(grid.field_data["rpm"][0]) == RPM
    assert float(grid.field_data["total_ctm_Nm"][0]) == pytest.approx(f.totals.ctm_Nm)


def test_vtu_reads_back_with_meshio(tmp_path, state):
    import meshio

    f, h, grid = state
    path = tmp_path / "elements.vtu"
    views.write_vtu(grid, path)
    m = meshio.read(path)
    assert [c.type for c in m.cells] == ["tetra"] and len(m.cells[0].data) == len(f)
    for name in grid.cell_data.keys():
        assert name in m.cell_data, name
    np.testing.assert_allclose(m.cell_data["ctm_Nm"][0], f.ctm_Nm, rtol=0, atol=0)
    np.testing.assert_array_equal(m.cell_data["ctm_share_band"][0], f.ctm_share_band)
    assert float(m.field_data["blade_angle_deg"][0]) == 25.0
    assert {f"region_{i}" for i in range(len(REGIONS))} <= {k[:8] for k in m.field_data}
    with pytest.raises(OutputExistsError):
        views.write_vtu(grid, path)
    views.write_vtu(grid, path, force=True)
    assert no_temp_files(tmp_path)


# --- renders ---------------------------------------------------------------------------------


def test_render_field_planform_not_blank_and_fields_differ(tmp_path, demo, state):
    f, h, grid = state
    a = views.render_field(demo, f, "ctm_Nm", tmp_path / "ctm.png", grid=grid, window_size=SMALL)
    b = views.render_field(demo, f, "radial_pull_N", tmp_path / "pull.png", grid=grid, window_size=SMALL)
    ia, ib = assert_not_blank(a), assert_not_blank(b)
    assert ia.shape == (SMALL[1], SMALL[0], 3)
    assert np.mean(np.any(np.abs(ia - ib) > 30, axis=-1)) > 0.02  # the two fields look different
    # the CTM picture uses the diverging map: toward-fine orange is present (PuOr low end: R > B)
    blade = ~np.all(np.abs(ia - np.array([243, 243, 240])) <= 10, axis=-1)
    orange = (ia[..., 0] - ia[..., 2] > 60) & blade
    assert orange.mean() > 0.005
    with pytest.raises(OutputExistsError):
        views.render_field(demo, f, "ctm_Nm", a, grid=grid, window_size=SMALL)
    assert no_temp_files(tmp_path)


@pytest.mark.parametrize("field,view", [("ctm_Nm", "tip"), ("region", "iso"), ("ctm_share_band", "planform")])
def test_render_other_views_and_categories(tmp_path, demo, state, field, view):
    f, h, grid = state
    out = views.render_field(demo, f, field, tmp_path / f"{field}_{view}.png", view=view, grid=grid,
                             window_size=SMALL)
    assert_not_blank(out, min_cover=0.02)


def test_render_raw_values_differ_from_densities(tmp_path, demo, state):
    f, h, grid = state
    a = views.render_field(demo, f, "ctm_Nm", tmp_path / "dens.png", grid=grid, window_size=SMALL)
    b = views.render_field(demo, f, "ctm_Nm", tmp_path / "raw.png", per_volume=False, grid=grid,
                           window_size=SMALL)
    assert np.mean(np.any(np.abs(pixels(a) - pixels(b)) > 30, axis=-1)) > 0.005


def test_render_clipped(tmp_path, demo, state):
    f, h, grid = state
    out = views.render_clipped(demo, f, "ctm_Nm", [0.4, 0.75], tmp_path / "clip.png", grid=grid,
                               window_size=SMALL)
    assert_not_blank(out, min_cover=0.03)
    with pytest.raises(ValueError, match="outside the blade"):
        views.render_clipped(demo, f, "ctm_Nm", [2.0], tmp_path / "bad.png", grid=grid, window_size=SMALL)
    assert not (tmp_path / "bad.png").exists()


def test_render_deviation_diverging_both_signs(tmp_path, demo):
    v, faces = demo.surfaces[0]
    dev = 1e-3 * np.tanh((v[:, 1] - 0.6) / 0.05)  # −1 mm inboard, +1 mm outboard
    out = views.render_deviation(v, faces, dev, tmp_path / "dev.png", window_size=SMALL)
    img = assert_not_blank(out, min_cover=0.02)
    brown = (img[..., 0] - img[..., 2] > 60).mean()   # BrBG low end
    teal = (img[..., 2] - img[..., 0] > 40).mean()    # BrBG high end
    assert brown > 0.003 and teal > 0.003
    with pytest.raises(ValueError, match="one per vertex"):
        views.render_deviation(v, faces, dev[:-1], tmp_path / "dev2.png", window_size=SMALL)


# --- plots -------------------------------------------------------------------------------------


def test_plots_written_and_not_blank(tmp_path, demo, state):
    f, h, _ = state
    betas, ctm, k = api.pitch_sweep(demo, RPM, -10, 90, 2)
    a = views.plot_ctm_sweep(betas, ctm, k, 25.0, tmp_path / "sweep.png", "sweep")
    rpms = np.linspace(0, 2800, 8)
    ops = [api.loads_at(demo, r, 25.0) for r in rpms]
    b = views.plot_rpm_sweep(rpms, [o.ctm_Nm for o in ops], [o.radial_pull_N for o in ops],
                             tmp_path / "rpm.png", operating_rpm=RPM)
    c = views.plot_hot_spots(h, tmp_path / "hot.png")
    for p in (a, b, c):
        img = pixels(p)
        assert background_fraction(img, "#ffffff", tol=3) < 0.97 and distinct_colours(img) > 20
    with pytest.raises(OutputExistsError):
        views.plot_hot_spots(h, c)
    assert no_temp_files(tmp_path)


def test_zero_crossings_of_the_sweep(demo):
    # the closed-form zeros of the CTM curve are where the sampled sweep changes sign
    betas, ctm, _ = api.pitch_sweep(demo, RPM, -30, 120, 0.5)
    found = views.zero_crossings(betas, ctm)
    exact = demo.ctm_curve.zeros(-30, 120)
    assert len(found) == len(exact) >= 1
    np.testing.assert_allclose(found, exact, atol=0.01)


def test_bad_requests_are_refused_before_writing(tmp_path, demo, state):
    f, h, grid = state
    with pytest.raises(ValueError, match="unknown view"):
        views.render_field(demo, f, "ctm_Nm", tmp_path / "x.png", view="side", grid=grid, window_size=SMALL)
    with pytest.raises(ValueError, match="unknown field"):
        views.render_field(demo, f, "stress", tmp_path / "y.png", grid=grid, window_size=SMALL)
    assert os.listdir(tmp_path) == []
