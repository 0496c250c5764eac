"""Write the demo blade meshes of bladesolid (the invented Brightwater Propellers BW-3).

Usage: ``python scripts/make_demo.py [OUTDIR]`` (default: ``meshes/`` of the repository).

Also writes ``demo_blade.step``, the same blade as a CAD solid, when the optional gmsh
package is installed (``pip install 'bladesolid[cad]'``).
"""

from __future__ import annotations

import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from bladesolid.demo import write_demo_meshes, write_demo_step  # noqa: E402


def main(argv: list[str] | None = None) -> int:
    args = sys.argv[1:] if argv is None else argv
    if len(args) > 1 or (args and args[0] in ("-h", "--help")):
        print(__doc__.strip())
        return 0 if args and args[0] in ("-h", "--help") else 2
    outdir = Path(args[0]) if args else Path(__file__).resolve().parents[1] / "meshes"
    paths = list(write_demo_meshes(outdir))
    try:
        import gmsh  # noqa: F401
    except ImportError:
        print("skipped demo_blade.step: needs the optional gmsh package "
              "(pip install 'bladesolid[cad]')")
    else:
        paths.append(write_demo_step(outdir / "demo_blade.step"))
    for path in paths:
        print(f"wrote {path} ({path.stat().st_size / 1024:.0f} KiB)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
