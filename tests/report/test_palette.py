"""The colours of the loop and phase-portrait marks stay apart for readers with a colour-vision
deficiency, and colour is never a mark's only cue."""

import itertools

import numpy as np
import pytest

from eigengate.reports.figures import MARK_COLOURS
from eigengate.reports.portrait import EQUILIBRIUM_MARKS

# Simulation of dichromacy (severity 1.0) in linear RGB: Machado, Oliveira & Fernandes,
# "A physiologically-based model for simulation of color vision deficiency", IEEE TVCG 2009
# (matrices from memory of the paper's table).
DICHROMACY = {
    "protanopia": [[0.152286, 1.052583, -0.204868], [0.114503, 0.786281, 0.099216],
                   [-0.003882, -0.048116, 1.051998]],
    "deuteranopia": [[0.367322, 0.860646, -0.227968], [0.280085, 0.672501, 0.047413],
                     [-0.011820, 0.042940, 0.968881]],
    "tritanopia": [[1.255528, -0.076749, -0.178779], [-0.078411, 0.930809, 0.147602],
                   [0.004733, 0.691367, 0.303900]],
    "typical": np.eye(3).tolist(),
}
#: Smallest CIE 1976 colour difference ΔE*ab between two marks (common practice: about 2 is
#: just noticeable; 20 reads as a different colour at a glance) and against the white page.
MIN_APART, MIN_ON_WHITE = 20.0, 40.0


def _linear(hex_colour: str) -> np.ndarray:  # sRGB (IEC 61966-2-1) to linear
    c = np.array([int(hex_colour[i:i + 2], 16) / 255 for i in (1, 3, 5)])
    return np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)


def _lab(rgb_linear: np.ndarray) -> np.ndarray:  # CIE L*a*b*, D65 white
    xyz = np.array([[0.4124, 0.3576, 0.1805], [0.2126, 0.7152, 0.0722],
                    [0.0193, 0.1192, 0.9505]]) @ rgb_linear
    t = xyz / np.array([0.95047, 1.0, 1.08883])
    f = np.where(t > (6 / 29) ** 3, np.cbrt(t), t / (3 * (6 / 29) ** 2) + 4 / 29)
    return np.array([116 * f[1] - 16, 500 * (f[0] - f[1]), 200 * (f[1] - f[2])])


def _seen(hex_colour: str, vision: str) -> np.ndarray:
    return _lab(np.clip(np.array(DICHROMACY[vision]) @ _linear(hex_colour), 0.0, 1.0))


@pytest.mark.parametrize("vision", sorted(DICHROMACY))
def test_mark_colours_stay_apart(vision):
    for (a, ca), (b, cb) in itertools.combinations(MARK_COLOURS.items(), 2):
        d = float(np.linalg.norm(_seen(ca, vision) - _seen(cb, vision)))
        assert d >= MIN_APART, f"{a} and {b} look alike with {vision}: ΔE {d:.1f}"
    for name, c in MARK_COLOURS.items():
        d = float(np.linalg.norm(_seen(c, vision) - _seen("#ffffff", vision)))
        assert d >= MIN_ON_WHITE, f"{name} fades into the page with {vision}: ΔE {d:.1f}"


def test_the_simulation_can_tell_a_confusable_pair():
    # the check itself: a pure red and a pure green of equal lightness are the classic
    # red-green confusion pair, and the simulation must bring them together
    red, green = "#d03030", "#5f8f00"
    typical = np.linalg.norm(_seen(red, "typical") - _seen(green, "typical"))
    deutan = np.linalg.norm(_seen(red, "deuteranopia") - _seen(green, "deuteranopia"))
    assert typical > 50 and deutan < MIN_APART


def test_equilibrium_types_differ_in_shape_or_fill_not_only_colour():
    looks = {(marker, face == "none") for marker, face, _, _ in EQUILIBRIUM_MARKS.values()}
    groups = {}  # stable / unstable / saddle / non-hyperbolic: four looks
    for kind, (marker, face, _, _) in EQUILIBRIUM_MARKS.items():
        groups.setdefault((marker, face == "none"), set()).add(kind.split("-")[0])
    assert len(looks) >= 4
    for kinds in groups.values():  # one look never mixes stable with unstable
        assert not {"stable", "unstable"} <= kinds
