"""Regenerate the demo result sets in ``meshes/demo/`` (invented for the demo).

1. Export a benchmark of two catalogue cases (``coax``: curved boundaries, two
   electrodes; ``smooth-mixed``: a pentagon with Dirichlet and Neumann sides),
   three levels, orders 1 and 2, into a temporary folder.
2. Solve it with the stand-in external solver ``tests/adapter_external.py``, once
   correctly (``demo/correct/``) and once with two deliberate bugs
   (``demo/flawed/``): Neumann edge loads lumped onto the first node of each edge,
   and quadratic elements with their boundary mid-edge nodes left on the chord.
3. Keep the manifest (``demo/manifest.json``) and the two result sets; the
   benchmark meshes themselves are not stored (re-export them with the command
   printed below).

Run from the repository root: ``python meshes/make_demo.py``.
"""

import json
import shutil
import sys
import tempfile
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
CASES = ("coax", "smooth-mixed")
#: Level-0 element sizes, coarser than the cases' defaults to keep the files small.
SIZES = {"coax": 0.4, "smooth-mixed": 0.3}
LEVELS = 3
FLAWS = ("neumann-lumped", "straight-p2")


def main(target=HERE / "demo"):
    sys.path.insert(0, str(ROOT / "tests"))
    from adapter_external import run_benchmark

    from lapsolve.atomic import write_text
    from verification.exact.catalogue import get_case
    from verification.export import export_benchmark

    target = Path(target)
    with tempfile.TemporaryDirectory() as tmp:
        bench = Path(tmp) / "bench"
        manifest = export_benchmark([get_case(n) for n in CASES], bench, levels=LEVELS,
                                    orders=(1, 2), size=SIZES)
        staged = Path(tmp) / "demo"
        run_benchmark(bench, staged / "correct")
        run_benchmark(bench, staged / "flawed", flaws=FLAWS)
        write_text(staged / "manifest.json", json.dumps(manifest, indent=1))
        if target.exists():
            shutil.rmtree(target)
        shutil.copytree(staged, target)
    total = sum(p.stat().st_size for p in target.rglob("*") if p.is_file())
    print(f"wrote {target} ({total / 1e6:.2f} MB); the benchmark itself: lapsolve export "
          f"{' '.join(CASES)} --levels {LEVELS} --order 1 2 --out bench/ (default sizes) or "
          "this script's SIZES")


if __name__ == "__main__":
    main()
