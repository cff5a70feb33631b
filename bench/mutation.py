"""Mutation testing of the georeferencing, control, layout, mosaic and scoring code.

mutmut (a maintained mutation tester, ``pip install mutmut==3.2.0 tbb``;
benchmark-only tools, not stitch dependencies) changes one operator, constant
or name at a time in ``stitch/georef.py``, ``stitch/control.py``,
``stitch/layout.py``, ``stitch/mosaic.py`` and ``stitch/puzzles.py`` and runs the tests that reach
the changed function; a mutant no test notices is a place where the suite
would let a bug through. Modules with numba kernels are not mutated (numba
cannot compile mutmut's trampolines) and tests that run stitch in a child
process are left out (the child does not see the mutant).

The run happens in a scratch copy of the repository (``--work``, default a
temporary folder) named ``stitch`` so mutmut finds the package. mutmut
imports the package from that copy: run it from an environment where stitch
is *not* installed in editable mode from this checkout, or the tests import
the unmutated code and every mutant "survives" (for instance a venv whose
site-packages holds a ``.pth`` line naming the system site-packages folder,
which adds the libraries without running their editable-install hooks).

    python bench/mutation.py            # prints mutmut's summary and the survivors
    python bench/mutation.py --keep     # keep the scratch copy to inspect mutants

mutmut runs each mutant's tests in a child forked from its own process, and
a child killed by a signal counts as "survived". Two things killed children
here, so most survivors of a plain ``mutmut run`` were such deaths, not gaps
in the tests:

* numba's default threading layer on this machine is GNU OpenMP, which
  terminates a forked child that runs a parallel kernel (the seam scoring
  of every solve) with SIGTERM. The run uses Intel TBB's layer, which
  survives a fork and, unlike ``workqueue``, the threads the seam scoring
  calls kernels from (``pip install tbb`` beside mutmut; its library is put
  on ``LD_LIBRARY_PATH``);
* mutmut 3.2 records each test's *teardown* time as its duration and limits
  a child to twice that sum plus one second of CPU (RLIMIT_CPU), so tests
  that run a solve die of SIGXCPU; the limit is raised to
  :data:`CPU_FLOOR_S` seconds.

    python bench/mutation.py --modules mosaic puzzles   # only these modules

Each surviving mutant runs every test that reaches its function, so the run
is long: puzzles and layout took 75 minutes on 2 cores, georef and control
60 minutes (672 mutants, sharing the machine with other work), and mosaic's
functions are reached by every solve test (several hours for all five).
"""

import argparse
import os
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

REPO = Path(__file__).resolve().parent.parent

#: Least CPU seconds a mutant's test run may take (see the module notes).
CPU_FLOOR_S = 900

# mutmut, with its per-mutant CPU limit raised to CPU_FLOOR_S.
_MUTMUT = f"""
import resource, sys
_set = resource.setrlimit
def _floored(which, limits):
    if which == resource.RLIMIT_CPU:
        limits = tuple(max(v, {CPU_FLOOR_S}) for v in limits)
    _set(which, limits)
resource.setrlimit = _floored
from mutmut.__main__ import cli
sys.argv[0] = "mutmut"
cli()
"""
MUTATED = ["stitch/georef.py", "stitch/control.py", "stitch/layout.py", "stitch/mosaic.py", "stitch/puzzles.py"]
TESTS = ["tests/test_georef.py", "tests/test_control.py", "tests/test_layout.py", "tests/test_metrics.py",
         "tests/test_mosaic.py", "tests/test_roundtrip.py", "tests/test_real_rasters.py", "tests/test_errors.py",
         "tests/test_outputs.py", "tests/test_rasters.py"]
# Tests that run stitch in a child process, and the fuzzers (slow, and not aimed at these modules).
LEFT_OUT = ["verbose_shows", "signals_leave", "full_disk", "overviews_are_not_built", "fuzz", "same_seed_same_bytes"]


def _setup(work, mutated):
    copy = work / "stitch"
    subprocess.run(["git", "clone", "-q", str(REPO), str(copy)], check=True)
    kept = sorted(str(p.relative_to(copy)) for p in (copy / "stitch").glob("*.py") if str(p.relative_to(copy)) not in mutated)
    cfg = ["[mutmut]", "do_not_mutate="] + [f"    {k}" for k in kept + ["stitch/search/*"]]
    cfg += ["also_copy=", "    demo_tiles", "    pyproject.toml", "    stitch/search"] + [f"    {k}" for k in kept]
    (copy / "setup.cfg").write_text("\n".join(cfg) + "\n")
    py = copy / "pyproject.toml"
    text = py.read_text()
    deselect = " and ".join(f"not {t}" for t in LEFT_OUT)
    # No doctests: mutmut copies each mutated function with its docstring,
    # and the copies' doctests then pass for it as the mutant's tests.
    text = text.replace('addopts = "--strict-markers -ra --doctest-modules"',
                        f'addopts = "--strict-markers -ra -p no:cacheprovider -k \'{deselect}\'"')
    paths = ", ".join(f'"{p}"' for p in TESTS)
    text = text.replace('testpaths = ["stitch", "tests"]', f"testpaths = [{paths}]")
    py.write_text(text)
    return copy


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--work", type=Path, help="scratch folder (default: a temporary one)")
    ap.add_argument("--keep", action="store_true", help="keep the scratch copy")
    ap.add_argument("--modules", nargs="+", choices=[Path(m).stem for m in MUTATED],
                    help="mutate only these modules (default: all of them)")
    ap.add_argument("--max-children", type=int, default=2, metavar="N",
                    help="mutants tested at once (default 2, one per core here)")
    args = ap.parse_args()
    if shutil.which("mutmut") is None:
        sys.exit("mutmut is not installed: pip install mutmut==3.2.0 tbb (see the module notes on the environment)")
    mutated = [m for m in MUTATED if args.modules is None or Path(m).stem in args.modules]
    mutmut = [sys.executable, "-c", _MUTMUT]
    work = args.work or Path(tempfile.mkdtemp(prefix="stitch-mutation-"))
    try:
        copy = _setup(work, mutated)
        lib = str(Path(sys.prefix) / "lib")
        env = dict(os.environ, NUMBA_THREADING_LAYER="tbb",
                   LD_LIBRARY_PATH=os.pathsep.join(filter(None, [lib, os.environ.get("LD_LIBRARY_PATH")])))
        subprocess.run([*mutmut, "run", "--max-children", str(args.max_children)], cwd=copy, env=env)
        results = subprocess.run([*mutmut, "results"], cwd=copy, capture_output=True, text=True).stdout
        survivors = [ln.split(":")[0].strip() for ln in results.splitlines() if ln.strip().endswith("survived")]
        untested = [ln.split(":")[0].strip() for ln in results.splitlines() if ln.strip().endswith("no tests")]
        print(f"survived: {len(survivors)}; not reached by any test: {len(untested)}")
        for name in survivors:
            print(f"  survived  {name}")
        for name in untested:
            print(f"  no tests  {name}")
    finally:
        if not args.keep and args.work is None:
            shutil.rmtree(work, ignore_errors=True)
        else:
            print(f"scratch copy kept in {work / 'stitch'}", file=sys.stderr)


if __name__ == "__main__":
    main()
