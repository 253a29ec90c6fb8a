"""Pick the verdict colours of report.style: one colour per verdict class, each within the
hue family a curator expects (consistent: green to teal, drifting: amber, contradicted: red),
as far apart as possible in normal vision and under simulated colour-vision deficiencies.

Candidates: an sRGB grid (steps of 15/255) with CIELAB L* in (30, 75), so a dashed line
shows on white and ink text on a light tint of it, chroma C* > 35, and the family's CIELAB
hue angle. The two neutral
classes are fixed (failed: near-black ink, other: mid grey). Starting from each family's
most saturated colour, each colour in turn is re-chosen (five rounds) to maximise its
smallest CIEDE2000 difference to the others and to the white page, over normal vision and
Machado, Oliveira & Fernandes (2009) severity-1 deuteranopia, protanopia and tritanopia.
Needs colour-science (a test dependency).

    python scripts/pick_verdict_colours.py
"""
import itertools

import numpy as np

from pick_technique_colours import _deficiencies, _lab

FAMILIES = {"consistent": (140.0, 215.0), "drifting": (60.0, 95.0),
            "contradicted": (0.0, 40.0)}
FIXED = {"failed": (0x26, 0x26, 0x30), "other": (0x8a, 0x8a, 0x8a), "page": (0xff,) * 3}


def main():
    import colour

    views = _deficiencies()
    grid = np.arange(0, 256, 15) / 255.0
    cand = np.array(list(itertools.product(grid, grid, grid)))
    lab0 = _lab(cand)
    hue = np.degrees(np.arctan2(lab0[:, 2], lab0[:, 1])) % 360.0
    usable = (lab0[:, 0] > 30) & (lab0[:, 0] < 75) & (np.hypot(lab0[:, 1], lab0[:, 2]) > 35)
    pools = {name: cand[usable & (hue >= lo) & (hue <= hi)] for name, (lo, hi) in
             FAMILIES.items()}
    fixed = np.array(list(FIXED.values())) / 255.0

    def worst(pool, others):
        out = np.full(len(pool), np.inf)
        for m in views:
            lab = _lab(pool, m)
            for ref in _lab(np.vstack([others, fixed]), m):
                out = np.minimum(out, colour.delta_E(lab, ref[None, :], method="CIE 2000"))
        return out

    chosen = {name: pool[np.argmax(np.hypot(*_lab(pool)[:, 1:].T))]
              for name, pool in pools.items()}
    for _ in range(5):
        for name, pool in pools.items():
            others = np.array([c for n, c in chosen.items() if n != name])
            chosen[name] = pool[np.argmax(worst(pool, others))]
    everything = np.vstack([np.array(list(chosen.values())), fixed])
    smallest = min(colour.delta_E(_lab(everything[[a]], m)[0], _lab(everything[[b]], m)[0],
                                  method="CIE 2000")
                   for m in views for a, b in itertools.combinations(range(len(everything)), 2))
    for name, rgb in {**chosen, **{k: np.array(v) / 255.0 for k, v in FIXED.items()}}.items():
        print(f"{name:13s} #%02x%02x%02x" % tuple(np.round(rgb * 255).astype(int)))
    print(f"smallest CIEDE2000 {smallest:.1f}")


if __name__ == "__main__":
    main()
