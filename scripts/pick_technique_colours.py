"""Pick the technique colours of report.style: a farthest-point search for colours that stay
apart in normal vision and under simulated colour-vision deficiencies.

Candidates: an sRGB grid (steps of 15/255) with CIELAB L* in (35, 75) and chroma C* > 30,
so every colour shows on white and reads as a colour. Starting from a dark blue-green, each
step adds the candidate whose smallest CIEDE2000 difference to the colours chosen so far,
to the orbit's ink and to the white page, taken over normal vision and Machado, Oliveira &
Fernandes (2009) severity-1 deuteranopia, protanopia and tritanopia, is largest; then each
colour in turn is re-chosen against the others (three rounds). Prints the colours and the
smallest difference. Needs colour-science (a test dependency). Runs a few minutes.

    python scripts/pick_technique_colours.py
"""
import itertools
import warnings

import numpy as np

_PRINT_OPTIONS = np.get_printoptions()
import colour  # noqa: E402

np.set_printoptions(**_PRINT_OPTIONS)

N_COLOURS = 8
START = (0x2a, 0x6f, 0x97)
FIXED = ((0x22, 0x31, 0x3f), (0xff, 0xff, 0xff))   # style.INK and the page


def _deficiencies():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")   # tritanomaly: the paper's own approximation
        return [None] + [colour.blindness.matrix_cvd_Machado2009(k, 1.0)
                         for k in ("Deuteranomaly", "Protanomaly", "Tritanomaly")]


def _lab(srgb, matrix=None):
    linear = colour.cctf_decoding(srgb, function="sRGB")
    if matrix is not None:
        linear = np.clip(linear @ matrix.T, 0.0, 1.0)
    xyz = colour.RGB_to_XYZ(linear, colour.RGB_COLOURSPACES["sRGB"], apply_cctf_decoding=False)
    return colour.XYZ_to_Lab(xyz, colour.CCS_ILLUMINANTS[
        "CIE 1931 2 Degree Standard Observer"]["D65"])


def main():
    views = _deficiencies()
    grid = np.arange(0, 256, 15) / 255.0
    cand = np.array(list(itertools.product(grid, grid, grid)))
    lab0 = _lab(cand)
    chroma = np.hypot(lab0[:, 1], lab0[:, 2])
    cand = cand[(lab0[:, 0] > 35) & (lab0[:, 0] < 75) & (chroma > 30)]
    labs = [_lab(cand, m) for m in views]
    fixed = [_lab(np.array(FIXED) / 255.0, m) for m in views]

    def smallest(chosen):
        out = np.full(len(cand), np.inf)
        for v in range(len(views)):
            for ref in [*fixed[v], *labs[v][chosen]]:
                out = np.minimum(out, colour.delta_E(labs[v], ref[None, :], method="CIE 2000"))
        return out

    chosen = [int(np.argmin(np.abs(cand - np.array(START) / 255.0).sum(axis=1)))]
    while len(chosen) < N_COLOURS:
        chosen.append(int(np.argmax(smallest(chosen))))
    for _ in range(3):
        for k in range(N_COLOURS):
            chosen[k] = int(np.argmax(smallest(chosen[:k] + chosen[k + 1:])))
    names = ["#%02x%02x%02x" % tuple(np.round(cand[i] * 255).astype(int)) for i in chosen]
    worst = min(colour.delta_E(labs[v][a], labs[v][b], method="CIE 2000")
                for v in range(len(views)) for a, b in itertools.combinations(chosen, 2))
    print(" ".join(names), f"smallest CIEDE2000 {worst:.1f}")


if __name__ == "__main__":
    main()
