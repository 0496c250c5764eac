"""Guards of bladesolid.io: the file itself, hostile content, parsers that spin or blow memory.

Every bad file is refused with one line naming it. (How fast the refusals come is measured in
``scripts/bench.py``, not asserted here.)
"""

from __future__ import annotations

import meshio
import pytest

from .iohelp import EXTENSIONS, box_arrays, refused, stl, tets


def test_missing_file(tmp_path):
    refused(tmp_path / "nope.stl", "file not found")


def test_directory(tmp_path):
    d = tmp_path / "dir.stl"
    d.mkdir()
    refused(d, "directory")


@pytest.mark.parametrize("ext", EXTENSIONS)
def test_empty_file(tmp_path, ext):
    path = tmp_path / f"empty{ext}"
    path.write_bytes(b"")
    refused(path, "empty")


def test_file_over_max_bytes(tmp_path):
    v, f = box_arrays()
    path = stl(tmp_path, "big.stl", v, f)
    refused(path, "limit", max_bytes=100)


def test_keyword_deck_include_is_refused(tmp_path):
    path = tmp_path / "inc.inp"
    path.write_text("*HEADING\n*INCLUDE, INPUT=/dev/zero\n")
    refused(path, "*INCLUDE")


def test_keyword_deck_generate_range_longer_than_file(tmp_path):
    nodes, elems = tets()
    path = tmp_path / "gen.inp"
    meshio.write(str(path), meshio.Mesh(nodes, [("tetra", elems)]), file_format="abaqus")
    with open(path, "a") as fh:
        fh.write("*ELSET, ELSET=ALL, GENERATE\n1, 2000000000, 1\n")
    refused(path, "GENERATE")


def test_gmsh_count_past_end_of_file_does_not_spin(tmp_path):
    # $NodeData whose real-tag count says 10^12: the reader would call readline() at the end
    # of the file that many times
    nodes, elems = tets()
    path = tmp_path / "spin.msh"
    meshio.write(str(path), meshio.Mesh(nodes, [("tetra", elems)]), file_format="gmsh22",
                 binary=False)
    with open(path, "a") as fh:
        fh.write("$NodeData\n0\n1000000000000\n")
    refused(path, "cannot be read as Gmsh")  # a spinning reader would never get here


def test_gmsh_sparse_node_tag_claim_does_not_blow_memory(tmp_path):
    # a 250-byte Gmsh 4.1 file with one node tagged 300 000 000: meshio fills a 2.4 GB lookup
    # table for it (measured: 2.3 GB resident without the loader's address-space cap). Run in a
    # fresh single-threaded process, as the command line is (the cap is per process and is
    # skipped when other Python threads are alive, e.g. after a threaded test in this worker).
    import subprocess
    import sys

    path = tmp_path / "tag.msh"
    path.write_text(
        "$MeshFormat\n4.1 0 8\n$EndMeshFormat\n"
        "$Nodes\n1 4 1 300000000\n3 1 0 4\n1\n2\n3\n300000000\n"
        "0 0 0\n1 0 0\n0 1 0\n0 0 1\n$EndNodes\n"
        "$Elements\n1 1 1 1\n3 1 4 1\n1 1 2 3 4\n$EndElements\n"
    )
    code = (
        "import resource, sys\n"
        "from bladesolid.io import read_mesh\n"
        "from bladesolid.errors import InputError\n"
        "before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss\n"
        "try:\n"
        "    read_mesh(sys.argv[1], 'mm')\n"
        "    print('LOADED')\n"
        "except InputError as exc:\n"
        "    print('REFUSED', exc)\n"
        "print('GROWTH_KIB', resource.getrusage(resource.RUSAGE_SELF).ru_maxrss - before)\n"
    )
    p = subprocess.run([sys.executable, "-c", code, str(path)], capture_output=True, text=True, timeout=120)
    assert p.returncode == 0, p.stderr
    lines = p.stdout.splitlines()
    assert lines[0].startswith(f"REFUSED {path}: ") and "cannot be read as Gmsh" in lines[0], p.stdout
    assert int(lines[-1].split()[1]) < 500 * 1024, p.stdout
