"""The whole review (`check`, `demo`): one folder with every output, the HTML page, escaping."""

import json
import math
from html.parser import HTMLParser

import numpy as np
import pytest

from bladesolid.cli import main

HOSTILE = '<script>alert("x")</script> & <b>bold</b> [red]markup[/red]'


class _Collect(HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags, self.text, self.scripts = [], [], 0

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        if tag == "script":
            self.scripts += 1

    def handle_data(self, data):
        self.text.append(data)


@pytest.fixture(scope="module")
def reviewed(tmp_path_factory, demo_path):
    d = tmp_path_factory.mktemp("review")
    job = d / "job.toml"
    job.write_text(
        f'name = {json.dumps(HOSTILE)}\nmesh = {json.dumps(str(demo_path))}\nunits = "mm"\n'
        'material = "al-2025-t6"\nblades = 3\nstations = 8\nrpm_sweep = "0:3000:500"\n'
        'allowable = "200 MPa"\n'
        '[[operating_point]]\nname = "take-off"\nrpm = 2500\nblade_angle = 22.0\n'
        '[[operating_point]]\nname = "overspeed"\nrpm = 2875\nblade_angle = 22.0\n'
    )
    out = d / "out"
    assert main(["check", str(job), "--out", str(out)]) == 0
    return out


def test_folder_holds_every_output(reviewed):
    names = {p.name for p in reviewed.iterdir()}
    for n in ("report.json", "report.html", "elements.vtu", "pitch_sweep.csv", "spanwise.csv", "hot_spots.csv",
              "operating_points.csv", "rpm_sweep.csv", "ctm_sweep.png", "spanwise.png", "hot_spots.png",
              "render_ctm_planform.png", "render_ctm_tip.png", "render_clipped.png"):
        assert n in names, n
    assert "CAUTION.txt" in names
    assert not [n for n in names if n.endswith(".part")]


def test_every_output_carries_the_caution(reviewed, footer_line):
    import html

    from bladesolid import CAUTION, report

    assert (reviewed / "CAUTION.txt").read_text().startswith(CAUTION)
    for csv_file in reviewed.glob("*.csv"):
        text = csv_file.read_text()
        assert text.splitlines()[0] == "# " + CAUTION, csv_file.name
        assert report.csv_rows(text), csv_file.name  # and the table still reads
    pngs = sorted(reviewed.glob("*.png"))
    assert len(pngs) >= 12
    for png in pngs:
        extent, dpi, marks = footer_line(png)
        # the footer's bottom line: at least 8 pt at the file's resolution (ink ~0.93 of the size)
        assert extent >= 0.85 * 8.0 / 72.0 * dpi and marks > 30, png.name
    assert CAUTION.encode() in (reviewed / "elements.vtu").read_bytes()[:1000]
    assert (reviewed / "report.html").read_text().count(html.escape(CAUTION)) == 2  # top and footer
    assert json.loads((reviewed / "report.json").read_text())["caution"] == CAUTION


def test_report_json_contract(reviewed):
    r = json.loads((reviewed / "report.json").read_text())
    assert r["schema"] == "bladesolid.report/1"
    for key in ("mass_properties", "blade_angle", "operating_points", "pitch_sweep", "spanwise", "hot_spots"):
        assert key in r
    row = r["spanwise"][0]
    assert {"radius_m", "area_m2", "mass_outboard_kg", "cf_outboard_N", "ctm_outboard_Nm", "stress_Pa"} <= set(row)
    # the spanwise root row carries (nearly) the whole blade: its tension is the radial pull
    # of the part outboard of it, a little under the whole blade's
    op = r["operating_points"][0]
    assert 0.98 * op["radial_pull_N"] < row["cf_outboard_N"] <= op["radial_pull_N"]
    # element fields add up to the solid totals
    tot = r["element_fields"]["totals"]
    assert tot["ctm_Nm"] == pytest.approx(op["ctm_Nm"], rel=1e-9)
    assert sum(x["ctm_pct"] for x in r["hot_spots"]["regions"]) == pytest.approx(100.0, rel=1e-9)
    assert r["input"]["name"] == HOSTILE  # kept verbatim in the data


def test_html_parses_holds_figures_and_escapes(reviewed):
    html = (reviewed / "report.html").read_text()
    r = json.loads((reviewed / "report.json").read_text())
    p = _Collect()
    p.feed(html)
    assert p.scripts == 0  # the hostile name did not become a script element
    assert "<b>bold</b>" not in html and "&lt;script&gt;" in html
    text = " ".join(p.text)
    assert "Results are engineering estimates" in text
    assert f"{r['mass_properties']['mass_kg']:.6g}" in text
    assert f"{r['operating_points'][0]['ctm_Nm']:.6g}" in text
    assert html.count("data:image/png;base64,") >= 6  # self-contained pictures
    assert "bladesolid 0." in text or "bladesolid" in text


def test_renders_are_not_blank_and_differ(reviewed):
    from PIL import Image

    imgs = {}
    for n in ("render_ctm_planform.png", "render_mass_planform.png", "render_radial_planform.png"):
        a = np.asarray(Image.open(reviewed / n).convert("RGB")).astype(int)
        bg = a[2, 2]
        fraction = (np.abs(a - bg).sum(axis=-1) > 30).mean()
        assert fraction > 0.03, n  # the blade and its colour bar cover a good part of the picture
        assert len(np.unique(a.reshape(-1, 3), axis=0)) > 50
        imgs[n] = a
    a, b = imgs["render_ctm_planform.png"], imgs["render_mass_planform.png"]
    assert np.abs(a - b).mean() > 1.0


def test_existing_folder_needs_force(reviewed, capsys):
    job = next(reviewed.parent.glob("job.toml"))
    assert main(["check", str(job), "--out", str(reviewed)]) == 2
    assert "exists already" in capsys.readouterr().err


def test_demo_writes_everything(tmp_path, capsys):
    d = tmp_path / "demo"
    assert main(["demo", str(d)]) == 0
    out = capsys.readouterr().out
    assert "review written" in out
    for n in ("demo_job.toml", "demo_blade.stl", "repair_job.toml", "repair_limits.toml",
              "review/report.html", "review/report.json", "review/elements.vtu", "CAUTION.txt", "review/CAUTION.txt"):
        assert (d / n).exists(), n
    r = json.loads((d / "review" / "report.json").read_text())
    assert r["counterweight_sizing"]["net_ctm_Nm"] == pytest.approx(0.0, abs=1e-9)
    assert main(["demo", str(d)]) == 2  # not overwritten without --force


@pytest.mark.slow
def test_repair_review_registers_and_judges(tmp_path, capsys):
    d = tmp_path / "demo"
    assert main(["demo", str(d)]) == 0
    capsys.readouterr()
    code = main(["check", str(d / "repair_job.toml"), "--out", str(d / "repair")])
    r = json.loads((d / "repair" / "report.json").read_text())
    c = r["comparison"]
    assert c["verdict"] in ("within limits", "outside limits")
    assert code == (1 if c["verdict"] == "outside limits" else 0)
    # registered into the nominal frame: the loads are those of a blade in the hub frame
    nominal = json.loads((d / "review" / "report.json").read_text())
    assert r["operating_points"][0]["radial_pull_N"] == pytest.approx(
        nominal["operating_points"][0]["radial_pull_N"], rel=5e-3)
    assert (d / "repair" / "deviation.png").exists()
    assert c["removed_volume_m3"] > 0


def test_check_with_a_blade_set_matches_it(tmp_path, demo_path, capsys):
    # three blade reports (the demo blade with different balance weights), then a job naming the set
    reports = []
    for i, grams in enumerate((0, 30, 60)):
        out = tmp_path / f"b{i}.json"
        args = ["loads", str(demo_path), "--units", "mm", "--material", "al-2025-t6", "--rpm", "2500",
                "--name", f"blade {i}", "--json", str(out)]
        if grams:
            args += ["--lumped-mass", f"{grams} g@20,300,0"]
        assert main(args) == 0
        reports.append(out.name)
    job = tmp_path / "job.toml"
    job.write_text(f'mesh = {json.dumps(str(demo_path))}\nunits = "mm"\nmaterial = "al-2025-t6"\nblades = 3\n'
                   f'stations = 4\n[[operating_point]]\nrpm = 2500\n[set]\nreports = {json.dumps(reports)}\n')
    capsys.readouterr()
    assert main(["check", str(job), "--out", str(tmp_path / "out")]) == 0
    r = json.loads((tmp_path / "out" / "report.json").read_text())
    m = r["match"]
    assert len(m["blades"]) == 3 and m["best"]["imbalance_kgm"] <= m["worst"]["imbalance_kgm"]
    assert "Blade set" in (tmp_path / "out" / "report.html").read_text()
    assert (tmp_path / "out" / "blade_set.png").read_bytes()[:4] == b"\x89PNG"
    # the same from `match`, with its picture
    png = tmp_path / "set.png"
    assert main(["match", *[str(tmp_path / r) for r in reports], "--plot", str(png)]) == 0
    assert png.read_bytes()[:4] == b"\x89PNG"


def _proof_report(tmp_path, **keys):
    """The loads report of a flat aluminium bar (0.25 × 0.75 × 1/64 m from r = 0.25 m, modelled at 0°;
    dimensions exact in the STL file's single precision) with a lumped mass and a sized
    counterweight, through the job keys."""
    import trimesh

    from bladesolid import api
    from bladesolid.job import build_job
    from bladesolid.review import loads_report

    bar = trimesh.creation.box([0.25, 0.75, 1 / 64])
    bar.apply_translation([0.0, 0.625, 0.0])
    bar.export(tmp_path / "bar.stl")
    data = {"mesh": "bar.stl", "units": "m", "density": "2700 kg/m^3",
            "operating_point": [{"name": "take-off", "rpm": 2500, "blade_angle": 30.0},
                                {"name": "overspeed", "rpm": 2875, "blade_angle": 30.0}],
            "lumped_mass": [{"name": "balance weight", "mass": "0.05 kg", "position": [0.0, 0.3, 0.01]}],
            "counterweight": {"radius": 0.15, "arm": 0.08, "clocking": 90.0}}
    data.update(keys)
    job = build_job(data, str(tmp_path / "job.toml"), str(tmp_path))
    blade = api.blade_from_job(job, elements=False)
    return loads_report(blade, job, api.loads_for_job(blade, job))


@pytest.mark.parametrize("rated", [2600.0, None])
def test_proof_load_at_rated_speed_with_lumped_mass_and_counterweight(tmp_path, rated):
    # Proof load = 2 × the radial pull at the maximum rated speed of everything that turns with the
    # blade (14 CFR 35.35, centrifugal load tests — from memory): the bar, the lumped mass and the
    # counterweight the job sizes, each m Ω² r (centripetal force of a mass at radius r, any
    # dynamics text; no precone, so r is the radius along the pitch axis at every blade angle).
    r = _proof_report(tmp_path, **({} if rated is None else {"rated_rpm": rated}))
    pl, cw = r["proof_load"], r["counterweight_sizing"]
    rpm = 2875.0 if rated is None else rated  # without rated_rpm: the highest operating speed
    w2 = (rpm * 2 * math.pi / 60) ** 2
    m_bar = 2700.0 * 0.25 * 0.75 / 64
    assert cw["mass_kg"] > 0
    expected = w2 * (m_bar * 0.625 + 0.05 * 0.3 + cw["mass_kg"] * 0.15)
    assert pl["radial_pull_N"] == pytest.approx(expected, rel=1e-12)
    assert pl["radial_pull_counterweight_N"] == pytest.approx(w2 * cw["mass_kg"] * 0.15, rel=1e-12)
    assert pl["radial_pull_lumped_N"] == pytest.approx(w2 * 0.05 * 0.3, rel=1e-12)
    assert pl["proof_load_N"] == pytest.approx(2 * expected, rel=1e-12)
    assert pl["factor"] == 2.0 and pl["basis_rpm"] == rpm and pl["includes_counterweight"] is True
    assert pl["blade_angle_deg"] == 30.0 and "35.35" in pl["source"]
    if rated is None:
        assert "highest operating-point speed" in pl["basis"] and "no maximum rated speed" in pl["basis"]
        assert pl["at_operating_point"] == "overspeed"
    else:
        assert "maximum rated speed" in pl["basis"] and "2600" in pl["basis"]
