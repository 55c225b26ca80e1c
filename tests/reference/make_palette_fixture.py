#!/usr/bin/env python3
"""How far apart the chart palette's scenario colours stay for readers with
a colour-vision deficiency, computed with colorspacious: the Machado, Oliveira
& Fernandes (2009) simulation of protan, deutan and tritan vision at full
severity ("sRGB1+CVD", severity 100), and colour difference as Euclidean
distance in CAM02-UCS (Luo, Cui & Li 2006; colorspacious.deltaE).

    pip install colorspacious==1.1.2 numpy==2.4.6
    python3 tests/reference/make_palette_fixture.py

Writes tests/fixtures/palette_cvd.json: the four scenario colours as given
to the script, and for normal vision and each deficiency the smallest
difference between any two of them and which pair it is. tests/palette.rs
holds the chart constants to these colours and the differences to a floor.
"""
import itertools
import json
import os

import numpy as np
from colorspacious import cspace_convert, deltaE

HERE = os.path.dirname(os.path.abspath(__file__))

# The scenario colours of src/render/charts.rs (baseline, removed, capped,
# stressed), as hex.
PALETTE = {"baseline": "1b4f8a", "removed": "23947c", "capped": "a878d8", "stressed": "dc9a26"}


def rgb1(hex_colour):
    return np.array([int(hex_colour[i:i + 2], 16) for i in (0, 2, 4)]) / 255.0


def main():
    colours = {k: rgb1(v) for k, v in PALETTE.items()}
    vision = {}
    for cvd in ["normal", "protanomaly", "deuteranomaly", "tritanomaly"]:
        if cvd == "normal":
            seen = colours
        else:
            space = {"name": "sRGB1+CVD", "cvd_type": cvd, "severity": 100}
            seen = {k: np.clip(cspace_convert(c, space, "sRGB1"), 0, 1) for k, c in colours.items()}
        pairs = {
            f"{a}/{b}": float(deltaE(seen[a], seen[b], input_space="sRGB1"))
            for a, b in itertools.combinations(PALETTE, 2)
        }
        worst = min(pairs, key=pairs.get)
        vision[cvd] = {"min_delta_e": pairs[worst], "closest_pair": worst, "pairs": pairs}
    out = {
        "source": "colorspacious 1.1.2: Machado et al. (2009) simulation, severity 100; CAM02-UCS distance",
        "palette": PALETTE,
        "vision": vision,
    }
    path = os.path.join(HERE, "..", "fixtures", "palette_cvd.json")
    with open(path, "w") as f:
        json.dump(out, f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    main()
