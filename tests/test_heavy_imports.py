"""What a fit from the command line imports: the heavy libraries it must not load."""
import subprocess
import sys
from pathlib import Path

LOG = Path(__file__).resolve().parent.parent / "sample_measurements" / "measurements.csv"
TARGET_AND_PARALLAX = ["--target-ra", "14h27m13.4s", "--target-dec", "+38d41m06s",
                       "--parallax", "40.68", "0.40"]


def _loaded(args, loaded):
    """(exit status, ``loaded``'s value) of ``orbweigh fit LOG args`` in a clean
    interpreter; ``loaded`` is an expression over ``sys.modules``."""
    code = ("import sys\n"
            "from orbweigh.cli.main import main\n"
            f"status = main(['fit', {str(LOG)!r}] + {args!r})\n"
            f"print(status, {loaded})\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout
    return out.strip().splitlines()[-1]


def test_a_sampled_fit_from_the_command_line_loads_no_heavy_module(tmp_path):
    # scipy.stats (0.7-0.9 s to import), scipy.optimize (0.4 s), astropy.coordinates
    # (0.3 s) and astropy.table (0.2 s with its YAML) would be most of a sampled fit from
    # the command line: the whole command on the sample pair, precession and the draws
    # file included, loads none of them.
    heavy = ("scipy.stats", "scipy.optimize", "astropy.coordinates", "astropy.table")
    args = TARGET_AND_PARALLAX + ["--sample", "--steps", "300", "--quiet", "--out",
                                  str(tmp_path / "out")]
    assert _loaded(args, f"[m for m in {heavy!r} if m in sys.modules]") == "0 []"


def test_a_fit_with_a_mass_from_the_command_line_loads_no_astropy():
    # The README's main job (a log of plain decimal years, target coordinates, a parallax
    # and a mass ratio): Besselian years, precession and the third law need no astropy
    # module at all (importing its units takes 0.13 s, its time module 0.2 s).
    args = TARGET_AND_PARALLAX + ["--mass-ratio", "0.78", "0.03", "--quiet"]
    loaded = "sorted(m for m in sys.modules if m.split('.')[0] == 'astropy')"
    assert _loaded(args, loaded) == "0 []"
