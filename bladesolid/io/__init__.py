"""Read and validate blade solids: closed triangle surfaces and tetrahedral volume meshes.

One front door, :func:`read_mesh`. It reads

* surfaces: STL (ASCII and binary), OBJ, PLY, OFF — through trimesh, except binary STL,
  which is read here with one ``numpy.fromfile`` after the header has been checked;
* tetrahedral volume meshes: Gmsh ``.msh``, VTK ``.vtu``, keyword decks of tetrahedra ``.inp`` —
  through meshio
  (a volume file holding triangles only is treated as a surface),

scales the coordinates from the declared length unit to metres (model frame), and splits the
input into closed solids (:class:`Body`). Every problem found is an
:class:`~bladesolid.errors.InputError` ``"<path>: <one line>"``; things that were fixed or look
odd but may be right are returned as ``LoadedMesh.warnings``.

Checks, in order (the first failing one is reported):

file       missing, not a regular file, unreadable, empty, larger than ``max_bytes``,
           unknown extension; binary STL whose triangle count disagrees with its size
           (refused from the 84-byte header, before anything is allocated)
parse      any exception of trimesh/meshio becomes "cannot be read as <format>: <reason>"
arrays     no triangles; face indices out of range; NaN / infinite coordinates;
           coordinates beyond 1000 km
merge      exactly coincident vertices are merged (bit-exact, ``-0.0 == 0.0``)
faces      degenerate faces (repeated vertex, or area below 1e-12 of the squared bounding
           box diagonal) are refused, never dropped
edges      non-manifold edges (more than two faces), boundary edges (open surface),
           inconsistent winding (both faces traverse an edge the same way)
shells     each edge-connected closed shell is one body; zero volume is refused; a shell
           with negative volume (inside out) is flipped, with a warning
bodies     at most :data:`MAX_BODIES`; bodies whose bounding boxes overlap are intersected
           with manifold3d and refused when the common volume exceeds 1e-6 of the smaller
           (touching is fine; a shell inside another — e.g. an inner cavity — is refused)
size       a solid longer than 20 m or shorter than 20 mm gives a warning naming a unit
           that would make it plausible

Volume meshes: linear tetrahedra (``tetra``); quadratic ``tetra10`` are read through their
four corner nodes with a warning that states how far the mid-edge nodes lie from the straight
edges. Other 3-D cells are refused; points, lines and triangles beside tetrahedra are ignored.
Bodies come from Gmsh physical groups, element sets (``*ELSET``) or a region id array, else from the
face-connected components of the tetrahedra. Negative tetrahedra are reordered (warning);
zero-volume ones, faces shared by more than two tetrahedra and interior faces with both
tetrahedra on the same side (folded or overlapping elements) are refused.

Not checked here: self-intersection of one shell (no cheap exact test exists; the
tetrahedraliser in :mod:`bladesolid.mesh` refuses such a surface when it fills the solid).

The package, one module per seam:

============  ==================================================================
reader        the front door :func:`read_mesh`; :class:`Body`, :class:`LoadedMesh`
guards        file checks, parser boundary (memory cap, quiet), end-of-file guards, sniffing
surfaces      STL / OBJ / PLY / OFF to raw arrays; :func:`write_surface`
volumes       ``.msh`` / ``.vtu`` / ``.inp`` tetrahedra to bodies
checks        arrays, faces, edges, shells, tetrahedra, overlaps between bodies, size
inputs        the small input files (job, limits, transform, reports): :func:`read_toml`, :func:`read_json`
============  ==================================================================

Hostile input: binary STL sizes are checked from the header; third-party parsers run with a
temporary address-space limit proportional to the file size (Linux, single-threaded callers),
with a guard that stops a parser reading past the end of the file in a loop, and
``*INCLUDE`` in a keyword deck (which would open other files) is refused.
"""

from .checks import MAX_BODIES, manifold_solid, merge_coincident
from .guards import DEFAULT_MAX_BYTES
from .reader import Body, LoadedMesh, read_mesh
from .surfaces import SURFACE_FORMATS, write_surface
from .inputs import check_input_file, read_json, read_toml
from .volumes import VOLUME_FORMATS

__all__ = ["DEFAULT_MAX_BYTES", "MAX_BODIES", "SURFACE_FORMATS", "VOLUME_FORMATS", "Body", "LoadedMesh",
           "check_input_file", "manifold_solid", "merge_coincident", "read_json", "read_mesh", "read_toml",
           "write_surface"]
