"""Tetrahedral mass elements that fill a closed surface exactly.

TetGen (through the ``tetgen`` package) is run as a constrained tetrahedraliser with the
input surface preserved (switches ``pYQO0``: no Steiner points on the boundary, no facet
merging, no optimisation pass), so the union of the elements is exactly the input solid and the element volumes
add up to the closed-surface volume to round-off. When TetGen cannot recover the surface that
way it is run again with its optimisation pass, then with its quality refinement (``q``; more
interior points, the surface still kept). Interior points are only added when a
finer field is asked for (target element size or count). TetGen is deterministic for a
given input and switches.

Isolation
---------
TetGen is C++ that can corrupt its own heap on overlapping faces (a fanned tip cap that
crosses itself ends in ``malloc(): invalid size`` and SIGABRT) and then writes
``tetgen-tmpfile_skipped.*`` into the working folder. Every run therefore goes through
:func:`run_tetgen`, which runs the library in a child process whose working folder is a
private temporary folder (``bladesolid-*`` under the system temporary folder, removed
afterwards): a crash there becomes an :class:`~bladesolid.errors.InputError` and the caller
goes on. On Linux the child is a bare ``os.fork()`` of this process (the arrays are already in
its memory, ``tetgen`` is imported before the fork, results come back pickled through a pipe),
elsewhere — or when ``fork`` fails — a fresh ``python -m bladesolid.mesh`` process reads and
writes ``.npy`` files. The child only calls TetGen and element-wise numpy: no numba kernel,
BLAS or OpenMP code, whose thread pools do not survive a fork, runs there; glibc's allocator
and CPython reset their own locks across ``fork``; and the child leaves by ``os._exit`` (no
atexit handlers, no second flush of inherited buffers). A bare ``fork`` also works inside
dask's daemonic worker processes, where ``multiprocessing`` may not start children. Measured
(``scripts/bench.py`` section [6], demo blade, 19 440 faces, 2 shared cores, numba's threads up
in the parent): TetGen alone 0.63–1.46 s; a forked child adds 0.03–0.16 s (1.04–1.11x), a fresh
interpreter 0.5–0.9 s (1.5–1.6x, mostly importing numpy and tetgen); on a unit cube the fixed
costs are 0.004 s in process, 0.03 s forked, 0.5 s spawned.

Hollow bodies and inserts
-------------------------
A body's faces may hold several closed shells: its outer shell wound outward and any inner
shells wound *into the void* (normals away from the material, so the closed-surface integral
of the body gives outer minus cavities). Such a body is meshed in one TetGen run over all its
shells with region attributes (``A``); each region is classified by the winding number of the
body's own shells at the centroid of its largest element, and the regions outside the material
(cavities) are dropped. An insert (a separate body of its own material, nested in another) is
its own body; the host body's faces carry the insert's outer shell reversed (the insert's
*seat*, an inner shell like a cavity), so the host's elements exclude the insert's volume and
the insert is filled by its own run. :func:`body_boundaries` builds these boundaries from a
list of :class:`Shell` (each with its body index and a cavity flag), finding the host of each
insert by nesting.
"""

from __future__ import annotations

import contextlib
import os
import pickle
import signal
import subprocess
import sys
from dataclasses import dataclass

import numpy as np

from .errors import InputError
from .geometry import (  # noqa: F401 - the one definition of each, re-exported
    Shell, body_boundaries, orient_positive, shell_labels, tet_signed_volumes, winding_numbers)

#: Prefix of the private temporary folder that each tetrahedraliser run works in (the one prefix
#: of every temporary name, :data:`bladesolid.safefile.TEMP_PREFIX`; the full name carries the
#: process id and host, so that a later run can sweep the folder of a run that was killed).
TEMP_PREFIX = "bladesolid-"

#: How TetGen is run: ``"fork"`` (Linux default), ``"spawn"`` (a fresh interpreter; the
#: default elsewhere) or ``"inline"`` (in this process, unprotected: debugging only).
ISOLATIONS = ("fork", "spawn", "inline")

CRASH_HINT = "it is probably self-intersecting — give --repair to mend it (bladesolid.repair.repair_surface in Python)"


@dataclass(frozen=True)
class TetMesh:
    """Tetrahedral mass elements of all bodies.

    nodes : (n, 3) float, m (frame of the input)
    tets  : (k, 4) int64, positively oriented
    body  : (k,) int32, index of the body each element belongs to
    """

    nodes: np.ndarray
    tets: np.ndarray
    body: np.ndarray

    def __len__(self) -> int:
        return int(self.tets.shape[0])


@dataclass(frozen=True)
class TetGenResult:
    """What one TetGen run gave.

    nodes : (p, 3) float64, in the frame of the input; the input vertices first, in order
    tets : (k, 4) int64, as TetGen wrote them (not re-oriented)
    attributes : (k,) float64 region attribute of each element (switch ``A``), else None
    """

    nodes: np.ndarray
    tets: np.ndarray
    attributes: np.ndarray | None


class TetGenRefused(RuntimeError):
    """TetGen returned an error (it did not crash): the message is its own first line."""


# --- the isolated runner -----------------------------------------------------------------------


def default_isolation() -> str:
    """``"fork"`` on Linux, else ``"spawn"``."""
    return "fork" if sys.platform.startswith("linux") and hasattr(os, "fork") else "spawn"


def run_tetgen(
    vertices: np.ndarray,
    faces: np.ndarray,
    switches: str,
    holes=None,
    regions=None,
    *,
    source: str = "mesh",
    isolation: str | None = None,
    _fault: str | None = None,
) -> TetGenResult:
    """Run TetGen once on a piecewise linear complex, isolated from this process.

    vertices : (n, 3) float; faces : (m, 3) int (triangles into ``vertices``)
    switches : TetGen's command-line switches, e.g. ``"pYQO0"`` (surface kept, no optimisation),
      ``"pq1.4a1e-3Q"`` (quality mesh: radius–edge ratio 1.4, largest volume 1e-3, Steiner
      points allowed on the surface) or ``"pYQA"`` (one region attribute per enclosed region).
    holes : optional (h, 3) points inside voids to leave empty
    regions : optional sequence of ``(attribute, (x, y, z), max_volume)``; ``max_volume`` 0 or
      less means none (needs ``A`` to tag the elements, ``a`` to apply the volume bound)
    source : the file (or key) named in error messages
    isolation : one of :data:`ISOLATIONS`; default :func:`default_isolation`

    Raises :class:`InputError` when the child process dies by a signal (``"the tetrahedraliser
    crashed on this surface (signal 6); ..."``), :class:`TetGenRefused` when TetGen reports an
    error, :class:`MemoryError` when the child was killed (SIGKILL, e.g. by the kernel's
    out-of-memory killer). TetGen's own files never land in the caller's working folder.
    """
    isolation = isolation or default_isolation()
    if isolation not in ISOLATIONS:
        raise ValueError(f"isolation must be one of {ISOLATIONS}, got {isolation!r}")
    job = {
        "vertices": np.ascontiguousarray(vertices, dtype=np.float64),
        "faces": np.ascontiguousarray(faces, dtype=np.int32),
        "switches": str(switches),
        "holes": None if holes is None else np.asarray(holes, dtype=np.float64).reshape(-1, 3),
        "regions": None if regions is None else [
            (float(a), tuple(float(x) for x in p), float(mv)) for a, p, mv in regions
        ],
        "fault": _fault,
    }
    import tetgen  # noqa: F401  (imported here so that a forked child has it already)

    from .safefile import temp_folder

    with temp_folder() as workdir:
        if isolation == "inline":
            with contextlib.chdir(workdir), _quiet_stdout():
                payload = _tetgen_payload(job)
        elif isolation == "fork":
            try:
                payload = _run_forked(job, workdir)
            except _ForkFailed:
                payload = _run_spawned(job, workdir)
        else:
            payload = _run_spawned(job, workdir)
    return _result(payload, source)


class _ForkFailed(Exception):
    pass


def _result(payload, source: str) -> TetGenResult:
    kind = payload[0]
    if kind == "ok":
        _, nodes, tets, attrs = payload
        return TetGenResult(nodes, tets.astype(np.int64, copy=False), attrs)
    if kind == "error":
        raise TetGenRefused(payload[1])
    if kind == "signal":
        sig = payload[1]
        if sig == getattr(signal, "SIGKILL", 9):
            raise MemoryError(
                f"{source}: the tetrahedraliser was killed (signal {sig}), most likely out of memory"
            )
        raise InputError(source, f"the tetrahedraliser crashed on this surface (signal {sig}); {CRASH_HINT}")
    raise InputError(source, f"the tetrahedraliser stopped without a result ({payload[1]})")


def _tetgen_payload(job) -> tuple:
    """Run TetGen on a job dict; return ``("ok", nodes, tets, attributes)`` or ``("error", msg)``.
    This is the only code that runs in the child."""
    import tetgen

    if job.get("fault") == "abort":  # test hook: a native crash in the child
        os.abort()
    try:
        tg = tetgen.TetGen(job["vertices"], job["faces"])
        for p in job["holes"] if job["holes"] is not None else ():
            tg.add_hole(p)
        for a, p, mv in job["regions"] or ():
            tg.add_region(int(a), p, mv)
        out = tg.tetrahedralize(switches=job["switches"])
    except Exception as exc:  # the C library raises plain RuntimeError on bad input
        text = str(exc).strip()
        return ("error", text.splitlines()[0] if text else type(exc).__name__)
    nodes = np.ascontiguousarray(out[0], dtype=np.float64)
    tets = np.ascontiguousarray(out[1], dtype=np.int32)
    attrs = np.asarray(out[2], dtype=np.float64) if len(out) > 2 else np.zeros((0, 0))
    attrs = attrs[:, 0].copy() if attrs.ndim == 2 and attrs.shape[1] and len(attrs) == len(tets) else None
    return ("ok", nodes, tets, attrs)


def _run_forked(job, workdir: str) -> tuple:
    """The job in a forked child; results pickled through a pipe. The child's working folder
    is ``workdir`` and its standard output and error go to the null device."""
    import warnings

    r, w = os.pipe()
    try:
        with warnings.catch_warnings():
            # Python 3.12+ warns that forking a multi-threaded process may deadlock the child;
            # the child here takes no lock that another thread could hold (see the module notes).
            warnings.simplefilter("ignore", DeprecationWarning)
            pid = os.fork()
    except OSError as exc:  # e.g. ENOMEM under strict overcommit with a large parent
        os.close(r)
        os.close(w)
        raise _ForkFailed(str(exc)) from None
    if pid == 0:  # pragma: no cover - the child (coverage does not follow it)
        code = 70
        try:
            os.close(r)
            _child_signals()
            os.chdir(workdir)
            with contextlib.suppress(Exception):
                import faulthandler

                faulthandler.disable()  # a crash here is reported by the parent, not dumped
            null = os.open(os.devnull, os.O_WRONLY)
            os.dup2(null, 1)
            os.dup2(null, 2)
            payload = _tetgen_payload(job)
            with os.fdopen(w, "wb") as fh:
                pickle.dump(payload, fh, protocol=pickle.HIGHEST_PROTOCOL)
            code = 0
        except BaseException:
            code = 71
        finally:
            os._exit(code)
    os.close(w)
    status = None
    try:
        with os.fdopen(r, "rb") as fh:
            data = fh.read()  # until the child closes its end (done or dead)
        _, status = os.waitpid(pid, 0)
    finally:
        if status is None:  # interrupted (e.g. Ctrl-C): end the child we started, then reap it
            with contextlib.suppress(OSError):
                os.kill(pid, signal.SIGKILL)
            with contextlib.suppress(OSError):
                os.waitpid(pid, 0)
    code = os.waitstatus_to_exitcode(status)
    if code < 0:
        return ("signal", -code)
    if code != 0 or not data:
        return ("failed", f"child exit status {code}")
    return pickle.loads(data)


def _child_signals() -> None:  # pragma: no cover - runs in the forked child
    """In the forked child: SIGTERM and SIGINT end it at once (not the parent's handlers, which
    raise between bytecodes only), and on Linux it is killed when its parent dies, so that a
    parent killed outright leaves no tetrahedraliser running on."""
    for sig in (signal.SIGTERM, signal.SIGINT):
        with contextlib.suppress(OSError, ValueError):
            signal.signal(sig, signal.SIG_DFL)
    if sys.platform.startswith("linux"):
        with contextlib.suppress(Exception):
            import ctypes

            ctypes.CDLL(None, use_errno=True).prctl(1, int(signal.SIGKILL))  # PR_SET_PDEATHSIG = 1


def _run_spawned(job, workdir: str) -> tuple:
    """The job in a fresh interpreter (``python -m bladesolid.mesh WORKDIR``): arrays through
    ``.npy`` files in ``workdir``, which is also the child's working folder."""
    _save_job(job, workdir)
    env = dict(os.environ)
    root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    env["PYTHONPATH"] = root + (os.pathsep + env["PYTHONPATH"] if env.get("PYTHONPATH") else "")
    proc = subprocess.run(
        [sys.executable, "-m", "bladesolid.mesh", workdir],
        cwd=workdir, env=env, stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
    )
    if proc.returncode < 0:
        return ("signal", -proc.returncode)
    return _load_payload(workdir, proc.returncode)


def _save_job(job, folder: str) -> None:
    np.save(os.path.join(folder, "in_vertices.npy"), job["vertices"])
    np.save(os.path.join(folder, "in_faces.npy"), job["faces"])
    if job["holes"] is not None:
        np.save(os.path.join(folder, "in_holes.npy"), job["holes"])
    regions = np.array([[a, *p, mv] for a, p, mv in job["regions"] or ()], dtype=np.float64).reshape(-1, 5)
    np.save(os.path.join(folder, "in_regions.npy"), regions)
    with open(os.path.join(folder, "in_switches.txt"), "w", encoding="utf-8") as fh:
        fh.write(job["switches"] + "\n" + (job.get("fault") or ""))


def _load_job(folder: str) -> dict:
    with open(os.path.join(folder, "in_switches.txt"), encoding="utf-8") as fh:
        switches, _, fault = fh.read().partition("\n")
    holes = os.path.join(folder, "in_holes.npy")
    regions = np.load(os.path.join(folder, "in_regions.npy"))
    return {
        "vertices": np.load(os.path.join(folder, "in_vertices.npy")),
        "faces": np.load(os.path.join(folder, "in_faces.npy")),
        "switches": switches,
        "holes": np.load(holes) if os.path.exists(holes) else None,
        "regions": [(r[0], tuple(r[1:4]), r[4]) for r in regions] or None,
        "fault": fault.strip() or None,
    }


def _load_payload(folder: str, code: int) -> tuple:
    err = os.path.join(folder, "out_error.txt")
    if os.path.exists(err):
        with open(err, encoding="utf-8") as fh:
            return ("error", fh.read().strip())
    nodes = os.path.join(folder, "out_nodes.npy")
    if code != 0 or not os.path.exists(nodes):
        return ("failed", f"child exit status {code}")
    attrs = os.path.join(folder, "out_attributes.npy")
    return ("ok", np.load(nodes), np.load(os.path.join(folder, "out_tets.npy")),
            np.load(attrs) if os.path.exists(attrs) else None)


def _child_main(folder: str) -> int:  # pragma: no cover - runs in the spawned child
    payload = _tetgen_payload(_load_job(folder))
    if payload[0] == "error":
        with open(os.path.join(folder, "out_error.txt"), "w", encoding="utf-8") as fh:
            fh.write(payload[1])
        return 0
    _, nodes, tets, attrs = payload
    np.save(os.path.join(folder, "out_tets.npy"), tets)
    if attrs is not None:
        np.save(os.path.join(folder, "out_attributes.npy"), attrs)
    np.save(os.path.join(folder, "out_nodes.npy"), nodes)  # last: its presence means done
    return 0


@contextlib.contextmanager
def _quiet_stdout():
    """Silence the C library's own prints (it writes to file descriptor 1)."""
    try:
        fd = sys.stdout.fileno()
    except (AttributeError, OSError, ValueError):
        yield
        return
    sys.stdout.flush()
    saved = os.dup(fd)
    try:
        with open(os.devnull, "w") as devnull:
            os.dup2(devnull.fileno(), fd)
            try:
                yield
            finally:
                _flush_c_stdio()
    finally:
        os.dup2(saved, fd)
        os.close(saved)


def _flush_c_stdio():
    """Flush the C library's stdout buffer (where the C++ code's prints wait)."""
    try:
        import ctypes

        ctypes.CDLL(None).fflush(None)
    except (OSError, AttributeError):  # pragma: no cover - non-POSIX
        pass


# --- filling a surface -----------------------------------------------------------------------------


def tetrahedralise_surface(
    vertices: np.ndarray,
    faces: np.ndarray,
    *,
    max_volume: float | None = None,
    source: str = "mesh",
    isolation: str | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Fill one body's closed surface with tetrahedra, the surface preserved exactly.

    vertices : (n, 3) float, m;  faces : (m, 3) int, closed; one outer shell wound outward and
      optionally inner shells wound into the void (cavities, or the seats of inserts), whose
      regions are left empty.
    max_volume : optional largest element volume, m³ (adds interior points only, so it is met
      wherever the preserved surface allows: elements against large surface triangles stay
      as large as those triangles make them).
    Returns ``(nodes (p, 3), tets (k, 4))``; the first n nodes are the input vertices.

    Raises :class:`InputError` when the tetrahedraliser refuses the surface or crashes on it
    (typically a self-intersecting or badly degenerate surface).
    """
    vertices = np.ascontiguousarray(vertices, dtype=np.float64)
    faces = np.ascontiguousarray(faces, dtype=np.int32)
    # Tetgen works best near unit scale: solve in a normalised frame, map back exactly
    # (input vertices are copied back so the surface is bit-for-bit the input one).
    centre = 0.5 * (vertices.min(axis=0) + vertices.max(axis=0))
    scale = float(np.max(vertices.max(axis=0) - vertices.min(axis=0))) or 1.0
    local = (vertices - centre) / scale
    # p: a piecewise linear complex; Y: keep the input surface (no boundary Steiner points);
    # Q: quiet. First without the optimisation pass (O0: the integrals are exact whatever the
    # element shape, and on needle-triangle scans the optimiser is where TetGen spends its
    # time); when TetGen trips over a surface that way, again with it (its robust default).
    # Last, with TetGen's quality refinement (q, the surface still kept): its interior points
    # help the boundary recovery where both runs above end in "Internal TetGen error" (measured:
    # a bore of 32 or 64 needle facets inside the demo blade's shank; ~3 000 interior points,
    # the element volumes still add up to the closed-surface volume to round-off). Dropping Y
    # instead would let TetGen merge nearly coplanar facets and change the solid (8e-6 of the
    # volume there), so it is never done.
    if max_volume is None:
        attempts = ("pYQO0", "pYQ", "pYqQ")
    else:
        attempts = (f"pYqQa{max_volume / scale**3:.6g}",)
    several = len(faces) and int(shell_labels(faces).max()) > 0
    if several:  # one region attribute per enclosed region, to drop the cavities afterwards
        attempts = tuple(s + "A" for s in attempts)
    out = None
    msg = ""
    for switches in attempts:
        try:
            out = run_tetgen(local, faces, switches, source=source, isolation=isolation)
            break
        except TetGenRefused as exc:
            msg = str(exc)
    if out is None:
        raise InputError(
            source,
            f"the surface could not be filled with tetrahedra ({msg}); "
            "it is probably self-intersecting or has overlapping faces",
        )
    nodes_local, tets = out.nodes, out.tets
    if several and len(tets):
        tets = tets[_material_regions(local, faces, nodes_local, tets, out.attributes)]
    if tets.size == 0:
        raise InputError(source, "the surface encloses no volume that could be meshed")
    nodes = nodes_local * scale + centre
    n_in = len(vertices)
    if not np.allclose(nodes_local[:n_in], local, rtol=0, atol=1e-12):
        raise InputError(source, "the tetrahedraliser moved the input surface; refusing the result")
    nodes[:n_in] = vertices
    return nodes, orient_positive(nodes, tets)


def _material_regions(vertices, faces, nodes, tets, attributes) -> np.ndarray:
    """(k,) bool: elements in the regions where the body's shells wind once (its material).

    Each region (one TetGen attribute) is judged at the centroid of its largest element, which
    lies strictly inside the region, so the winding number there is an integer to round-off."""
    keep = np.zeros(len(tets), dtype=bool)
    if attributes is None:  # pragma: no cover - TetGen always tags with "A"
        attributes = np.zeros(len(tets))
    vol = np.abs(tet_signed_volumes(nodes, tets))
    for a in np.unique(attributes):
        idx = np.flatnonzero(attributes == a)
        k = idx[np.argmax(vol[idx])]
        centroid = nodes[tets[k]].mean(axis=0)
        if winding_numbers(vertices, faces, centroid[None])[0] > 0.5:
            keep[idx] = True
    return keep


def mass_elements(
    bodies,
    *,
    max_volume: float | None = None,
    target_elements: int | None = None,
    source: str = "mesh",
    progress=None,
    isolation: str | None = None,
) -> TetMesh:
    """Tetrahedral mass elements for every body (surfaces are meshed, volume meshes kept).

    bodies : sequence of :class:`bladesolid.io.Body` (anything with ``vertices``, ``faces``
      and ``tets``). A body's faces are the whole boundary of its material: one outer shell
      wound outward plus any inner shells wound into the void — cavities, and the seats of
      inserts (see :func:`body_boundaries`). Each body's elements fill exactly its material.
    max_volume : largest element volume, m³; or ``target_elements`` : roughly how many
    elements in all (converted to a largest volume from the total enclosed volume).
    progress : optional callable(done, total) for a progress display.
    isolation : how TetGen is run (:func:`run_tetgen`).
    Returns a :class:`TetMesh` whose ``body`` gives each element's body index.
    """
    from .moments import surface_volume_moments

    if target_elements is not None and max_volume is None:
        total = sum(abs(surface_volume_moments(b.vertices, b.faces).mass) for b in bodies)
        max_volume = total / max(int(target_elements), 1)
    all_nodes, all_tets, all_body = [], [], []
    offset = 0
    for i, b in enumerate(bodies):
        if b.tets is not None and max_volume is None:
            nodes, tets = np.asarray(b.vertices, float), orient_positive(b.vertices, b.tets)
        else:
            nodes, tets = tetrahedralise_surface(
                b.vertices, b.faces, max_volume=max_volume, source=source, isolation=isolation
            )
        all_nodes.append(nodes)
        all_tets.append(tets + offset)
        all_body.append(np.full(len(tets), i, dtype=np.int32))
        offset += len(nodes)
        if progress is not None:
            progress(i + 1, len(bodies))
    return TetMesh(np.concatenate(all_nodes), np.concatenate(all_tets), np.concatenate(all_body))


if __name__ == "__main__":  # pragma: no cover - the spawned child of run_tetgen
    sys.exit(_child_main(sys.argv[1]))
