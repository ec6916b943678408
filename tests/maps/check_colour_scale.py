"""Checks latentlift's colour scales with colorspacious (Debian python3-colorspacious), an
independent implementation of CIELAB (CIE 1976, D65) and of the colour-vision-deficiency
simulation of Machado, Oliveira and Fernandes (2009, IEEE TVCG 15(6), 1291-1298).

Usage: check_colour_scale.py COLOURS_FILE CHECK
COLOURS_FILE lines: "<kind> r g b" with kind seq256 (the scale at 256 even steps of t), bar12 (a
12-step colour bar), category (the class palette in order) or not_applicable.
Exit 0 when the check holds, 1 with a message otherwise.
"""
import itertools
import sys

import numpy as np
from colorspacious import cspace_convert

DEFICIENCIES = ("protanomaly", "deuteranomaly", "tritanomaly")


def load(path):
    kinds = {}
    with open(path) as f:
        for line in f:
            kind, r, g, b = line.split()
            kinds.setdefault(kind, []).append([int(r), int(g), int(b)])
    return {k: np.array(v, dtype=float) for k, v in kinds.items()}


def lab(rgb255, deficiency=None):
    rgb1 = rgb255 / 255.0
    if deficiency:  # severity 100: the complete deficiency (dichromacy) of Machado et al. 2009
        rgb1 = np.clip(cspace_convert(rgb1, {"name": "sRGB1+CVD", "cvd_type": deficiency, "severity": 100},
                                      "sRGB1"), 0, 1)
    return cspace_convert(rgb1, "sRGB1", "CIELab")


def delta_e(a, b):
    return np.sqrt(((a - b) ** 2).sum(axis=-1))


def fail(message):
    print(message)
    sys.exit(1)


def main():
    colours = load(sys.argv[1])
    check = sys.argv[2]
    seq, bar = colours["seq256"], colours["bar12"]
    if check == "lightness_monotonic":
        # CIELAB L* strictly rising along the scale (every 4th of the 256 samples, so that steps are
        # larger than 8-bit rounding), from dark (L* < 25) to light (L* > 88).
        L = lab(seq)[::4, 0]
        if not np.all(np.diff(L) > 0):
            fail("L* not strictly rising at t = %s" % (4 * np.nonzero(np.diff(L) <= 0)[0] / 255.0))
        if not (L[0] < 25 and L[-1] > 88):
            fail("L* range %.1f..%.1f" % (L[0], L[-1]))
    elif check == "equal_steps":
        # Neighbouring bins of a 12-step bar differ by equal CIE 1976 colour differences: each within
        # 8 % of their mean (8-bit rounding alone moves a difference by up to about 1 unit of ~8).
        d = delta_e(lab(bar[1:]), lab(bar[:-1]))
        spread = np.abs(d / d.mean() - 1).max()
        if spread > 0.08:
            fail("steps %s differ from their mean %.2f by up to %.1f %%" % (np.round(d, 2), d.mean(), 100 * spread))
    elif check == "readable_in_grey":
        # In grey only lightness is left: neighbouring bins at least 5 L* units apart.
        d = np.diff(lab(bar)[:, 0])
        if d.min() < 5:
            fail("L* steps %s" % np.round(d, 2))
    elif check == "colour_vision_deficiencies":
        # Under each simulated dichromacy lightness still rises and neighbouring bins stay at least
        # 4.5 units apart (CIE 1976): about twice the just-noticeable difference of 2.3 (common practice).
        for deficiency in DEFICIENCIES:
            simulated = lab(bar, deficiency)
            d = delta_e(simulated[1:], simulated[:-1])
            if d.min() < 4.5 or not np.all(np.diff(simulated[:, 0]) > 0):
                fail("%s: steps %s, L* %s" % (deficiency, np.round(d, 2), np.round(simulated[:, 0], 1)))
    elif check == "classes_distinct":
        # The first five class colours (the most classes a latentlift field has) at least 20 units apart
        # (CIE 1976) in normal vision and under each simulated dichromacy, and "not applicable" at least
        # 10 apart from every colour of the scale and of those classes (4.5 under a dichromacy, about
        # twice the just-noticeable difference of 2.3, common practice).
        cat = colours["category"][:5]
        for deficiency in (None,) + DEFICIENCIES:
            c = lab(cat, deficiency)
            worst = min(delta_e(c[i], c[j]) for i, j in itertools.combinations(range(len(c)), 2))
            if worst < 20:
                fail("classes %s apart only %.1f" % (deficiency or "normal", worst))
            na = lab(colours["not_applicable"], deficiency)
            near = min(delta_e(na, lab(seq, deficiency)).min(), delta_e(na, c).min())
            if near < (4.5 if deficiency else 10):
                fail("not applicable %s within %.1f of a scale or class colour" % (deficiency or "normal", near))
    elif check == "unlike_famous_defaults":
        # At t = 0, 0.5 and 1 the scale is at least 20 units (CIE 1976) away from the colours of widely
        # used default and published sequential maps at the same places, in either direction.
        # Anchor colours from memory (hex values as the maps are commonly published).
        famous = {
            "viridis": ["#440154", "#21918c", "#fde725"], "magma": ["#000004", "#b73779", "#fcfdbf"],
            "inferno": ["#000004", "#bc3754", "#fcffa4"], "plasma": ["#0d0887", "#cc4778", "#f0f921"],
            "cividis": ["#00224e", "#7d7c78", "#fee838"], "parula": ["#352a87", "#12beb9", "#f9fb0e"],
            "jet": ["#00007f", "#7dff7a", "#7f0000"], "turbo": ["#30123b", "#a4fc3c", "#7a0403"],
            "gray": ["#000000", "#808080", "#ffffff"], "YlGnBu": ["#081d58", "#41b6c4", "#ffffd9"],
            "YlOrRd": ["#800026", "#fd8d3c", "#ffffcc"], "Blues": ["#08306b", "#6baed6", "#f7fbff"],
            "PuBuGn": ["#014636", "#67a9cf", "#fff7fb"], "RdPu": ["#49006a", "#f768a1", "#fff7f3"],
        }
        ours = lab(seq[[0, 128, 255]])
        for name, hexes in famous.items():
            theirs = lab(np.array([[int(h[i:i + 2], 16) for i in (1, 3, 5)] for h in hexes], dtype=float))
            for order in (theirs, theirs[::-1]):
                if delta_e(ours, order).max() < 20:
                    fail("too close to %s: %s" % (name, np.round(delta_e(ours, order), 1)))
    else:
        fail("unknown check " + check)


if __name__ == "__main__":
    main()
