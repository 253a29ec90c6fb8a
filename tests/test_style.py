"""The technique look of report.style: fixed per technique, colour-blind safe, never colour alone.

Colour vision deficiency is simulated with the severity-1 matrices of Machado, Oliveira &
Fernandes (2009), IEEE TVCG 15(6), 1291, applied to linear sRGB, as taken from the
general colour library colour-science (which ships the paper's tables); colour differences
are CIEDE2000 in CIELAB under D65 (CIE 15:2004; formula as in Sharma, Wu & Dalal 2005,
Color Res. Appl. 30, 21).
"""
from __future__ import annotations

import itertools
import warnings

import numpy as np
import pytest

_PRINT_OPTIONS = np.get_printoptions()
import colour  # noqa: E402  (it sets numpy's legacy print mode on import, undone below)

np.set_printoptions(**_PRINT_OPTIONS)

from orbweigh.measurements import TECHNIQUE_DEFAULTS
from orbweigh.report import style



#: Smallest CIEDE2000 difference allowed between two technique colours, in every view.
#: A difference above about 10 reads as a different colour at a glance: common practice,
#: no source; 15 leaves room for small markers and print.
MIN_DELTA_E00 = 15.0
_DEFICIENCIES = ("Deuteranomaly", "Protanomaly", "Tritanomaly")


def _machado(kind):
    with warnings.catch_warnings():
        # colour-science notes that Machado's tritanomaly is an approximation (it is).
        warnings.simplefilter("ignore")
        return colour.blindness.matrix_cvd_Machado2009(kind, 1.0)


def _lab(hex_colours, matrix=None):
    srgb = np.array([[int(h[k:k + 2], 16) / 255.0 for k in (1, 3, 5)] for h in hex_colours])
    linear = colour.cctf_decoding(srgb, function="sRGB")
    if matrix is not None:
        linear = np.clip(linear @ matrix.T, 0.0, 1.0)
    xyz = colour.RGB_to_XYZ(linear, colour.RGB_COLOURSPACES["sRGB"], apply_cctf_decoding=False)
    white = colour.CCS_ILLUMINANTS["CIE 1931 2 Degree Standard Observer"]["D65"]
    return colour.XYZ_to_Lab(xyz, white)


def _palette():
    return ([s["color"] for s in style.TECHNIQUE_STYLE.values()]
            + list(style.OTHER_TECHNIQUE_COLORS))


def test_library_matches_the_published_tables():
    # Machado et al. 2009, table of deuteranomaly matrices, severity 1.0, first row (memory).
    assert _machado("Deuteranomaly")[0] == pytest.approx([0.367322, 0.860646, -0.227968],
                                                          abs=1e-6)
    # Protanomaly, severity 1.0, first row (memory).
    assert _machado("Protanomaly")[0] == pytest.approx([0.152286, 1.052583, -0.204868],
                                                        abs=1e-6)
    # Sharma, Wu & Dalal 2005, table 1, pair 1: Delta E00 = 2.0425.
    d = colour.delta_E([50.0, 2.6772, -79.7751], [50.0, 0.0, -82.7485], method="CIE 2000")
    assert d == pytest.approx(2.0425, abs=1e-4)


@pytest.mark.parametrize("deficiency", (None, *_DEFICIENCIES))
def test_technique_colours_stay_apart(deficiency):
    lab = _lab(_palette(), None if deficiency is None else _machado(deficiency))
    smallest = min(colour.delta_E(lab[i], lab[j], method="CIE 2000")
                   for i, j in itertools.combinations(range(len(lab)), 2))
    assert smallest >= MIN_DELTA_E00, f"{deficiency or 'normal vision'}: {smallest:.1f}"
    # Every colour stands off the white page too.
    white = _lab(["#ffffff"], None if deficiency is None else _machado(deficiency))[0]
    assert min(colour.delta_E(row, white, method="CIE 2000") for row in lab) >= MIN_DELTA_E00


def test_markers_differ_so_colour_is_never_the_only_cue():
    known = [s["marker"] for s in style.TECHNIQUE_STYLE.values()]
    others = list(style.OTHER_TECHNIQUE_MARKERS)
    assert len(set(known + others)) == len(known) + len(others)
    names = [f"technique {k}" for k in range(len(others))]
    looks = style.technique_styles(["speckle", *names])
    assert len({v["marker"] for v in looks.values()}) == len(looks)


def test_every_known_technique_has_its_fixed_look_whatever_else_the_log_holds():
    assert set(style.TECHNIQUE_STYLE) == set(TECHNIQUE_DEFAULTS) - {"unknown"}
    alone = style.technique_styles(["speckle"])
    crowded = style.technique_styles(["speckle", "micrometer", "lunar occultation", "aaa"])
    assert alone["speckle"] == crowded["speckle"] == style.TECHNIQUE_STYLE["speckle"]
    assert crowded["aaa"]["color"] == style.OTHER_TECHNIQUE_COLORS[0]
    assert crowded["lunar occultation"]["color"] == style.OTHER_TECHNIQUE_COLORS[1]


@pytest.mark.parametrize("deficiency", (None, *_DEFICIENCIES))
def test_verdict_colours_stay_apart(deficiency):
    matrix = None if deficiency is None else _machado(deficiency)
    lab = _lab([*style.VERDICT_PALETTE.values(), "#ffffff"], matrix)
    smallest = min(colour.delta_E(lab[i], lab[j], method="CIE 2000")
                   for i, j in itertools.combinations(range(len(lab)), 2))
    assert smallest >= MIN_DELTA_E00, f"{deficiency or 'normal vision'}: {smallest:.1f}"
