"""Shared small cases of the advisor tests: a 2 x 2 checkerboard of 10 mm cubes (the classic
desk demonstration) under a plate a little smaller than one magnet pair keeps them fast."""

from __future__ import annotations

import numpy as np

from matdb import advisor as A

CUBE10_2X2 = A.ArrangementSpec("cuboid", (0.01, 0.01, 0.01), "checkerboard", 2, 2)
PLATE = "8 mm x 8 mm"


def best_row(df, **eq):
    """The first row of ``df`` whose columns equal ``eq``."""
    sel = np.ones(len(df), dtype=bool)
    for k, v in eq.items():
        sel &= (df[k] == v).to_numpy()
    return df[sel].iloc[0]
