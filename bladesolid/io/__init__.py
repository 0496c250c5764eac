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
weld       when the exact merge leaves boundary or non-manifold edges (a facet-by-facet CAD
           export), vertices within 1e-6 of the bounding-box diagonal are merged, never across
           parts; ``weld_tol`` given: always, at that distance (the count is a warning)
faces      degenerate faces (repeated vertex, or area below 1e-12 of the squared bounding
           box diagonal) are refused, never dropped
edges      non-manifold edges (more than two faces), boundary edges (open surface),
           inconsistent winding (both faces traverse an edge the same way)
shells     each edge-connected closed shell; zero volume is refused; an outermost shell
           with negative volume (inside out) is flipped with the shells nested in it, with a
           warning
nesting    a shell nested in another is a cavity (wound into the void: subtracted) or an
           insert (wound outward: a body of its own material, seated in its host)
self-int.  every body's boundary is checked for faces that cross, touch or overlap
           (:mod:`bladesolid.selfintersect`); refused with the count, a point and a box
bodies     at most :data:`MAX_BODIES`; bodies (other than an insert and its host) whose
           bounding boxes overlap are intersected with manifold3d and refused when the common
           volume exceeds 1e-6 of the smaller (touching is fine)
size       a solid longer than 20 m or shorter than 20 mm gives a warning naming a unit
           that would make it plausible

With ``repair=True`` a surface is first mended part by part (:mod:`bladesolid.repair`), every
change recorded (``LoadedMesh.repairs``), and then goes through the same checks. Refusals of
a damaged surface name ``repair=True`` (or say that the repair could not mend it).

Volume meshes: linear tetrahedra (``tetra``); quadratic ``tetra10`` are read through their
four corner nodes with a warning that states how far the mid-edge nodes lie from the straight
edges. Other 3-D cells are refused; points, lines and triangles beside tetrahedra are ignored.
Bodies come from Gmsh physical groups, element sets (``*ELSET``) or a region id array, else from the
face-connected components of the tetrahedra. Negative tetrahedra are reordered (warning);
zero-volume ones, faces shared by more than two tetrahedra and interior faces with both
tetrahedra on the same side (folded or overlapping elements) are refused.

The package, one module per seam:

============  ==================================================================
reader        the front door :func:`read_mesh`; :class:`Body`, :class:`LoadedMesh`
guards        file checks, parser boundary (memory cap, quiet), end-of-file guards, sniffing
surfaces      STL / OBJ / PLY / OFF to raw arrays; :func:`write_surface`
volumes       ``.msh`` / ``.vtu`` / ``.inp`` tetrahedra to bodies
bodies        a raw surface to bodies: merge, weld, shells, cavities and inserts, self-intersection
checks        arrays, faces, edges, tetrahedra, overlaps between bodies, size
inputs        the small input files (job, limits, transform, reports): :func:`read_toml`, :func:`read_json`
============  ==================================================================

Hostile input: binary STL sizes are checked from the header; third-party parsers run with a
temporary address-space limit proportional to the file size (Linux, single-threaded callers),
with a guard that stops a parser reading past the end of the file in a loop, and
``*INCLUDE`` in a keyword deck (which would open other files) is refused.
"""

from .bodies import surface_bodies
from .checks import MAX_BODIES, manifold_solid, merge_coincident
from .guards import DEFAULT_MAX_BYTES
from .reader import Body, LoadedMesh, read_mesh
from .surfaces import SURFACE_FORMATS, stl_bytes, write_surface
from .inputs import check_input_file, read_json, read_toml
from .volumes import VOLUME_FORMATS

__all__ = ["DEFAULT_MAX_BYTES", "MAX_BODIES", "SURFACE_FORMATS", "VOLUME_FORMATS", "Body", "LoadedMesh",
           "check_input_file", "manifold_solid", "merge_coincident", "read_json", "read_mesh", "read_toml",
           "stl_bytes", "surface_bodies", "write_surface"]
