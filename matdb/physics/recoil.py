"""Recoil permeability: the magnets' own demagnetisation in the field model.

A permanent magnet on its recoil line has ``J = J_r + chi_rec mu0 H`` with the
recoil susceptibility ``chi_rec = mu_rec - 1`` (``mu_rec`` from the grade table) and
``H`` the field inside it, from itself and from its neighbours. The idealised
("rigid") model takes ``J = J_r``.

Method
------
Each magnet is given one uniform polarisation ``J_i`` (a Galerkin projection of the
integral equation of magnetostatics onto piecewise-constant polarisations, one cell per
magnet: the method of moments with volume-averaged rather than point-matched
interaction [1]_ [2]_):

    J_i = J_r,i + chi_i < mu0 H >_i,    < mu0 H >_i = sum_j A_ij J_j,

where ``A_ij`` (3 x 3) is the volume average over magnet ``i`` of ``mu0 H`` made by magnet
``j`` polarised with unit ``J`` along each axis (``-N`` for ``i = j``, ``N`` the
magnetometric demagnetising tensor of the body [3]_), evaluated with the closed-form
fields of :mod:`matdb.physics.fields` at Gauss-Legendre points inside each magnet (images
in a steel back plate included). The linear system ``(I - X A) J = J_r`` is solved once
per geometry and recoil susceptibilities, and since it is linear in ``J_r``, the matrix
``S = (I - X A)^-1`` is kept and reused for every remanence (temperature, minimum-spec
worst case): ``J = S J_r``. Cylinders and rings keep their polarisation along their axis
(only the axial part of the equation is solved for them).

The magnet's total moment is then right to first order in ``chi_rec`` (volume-averaged
interaction conserves it), so are the field far away and the mean reduction of the field
near the faces; the non-uniform part of the induced polarisation (stronger near the
edges) is not represented. Checked against the point-matched moment method on finely
meshed magnets (magpylib-material-response) in ``tests/test_recoil.py``.

References
----------
.. [1] O. Chadebec, J.-L. Coulomb and F. Janet, "A review of magnetostatic moment method",
   IEEE Trans. Magn. 42, 515-520 (2006).
.. [2] R. F. Harrington, Field Computation by Moment Methods, Macmillan (1968), ch. 1
   (Galerkin's method: testing with the basis functions themselves).
.. [3] A. Aharoni, "Demagnetizing factors for rectangular ferromagnetic prisms",
   J. Appl. Phys. 83, 3432-3434 (1998).
"""

from __future__ import annotations

import math
import threading
from typing import Sequence

import numpy as np

from matdb.physics.fields import MagnetSet

__all__ = ["interaction_matrix", "response_matrix", "effective_polarizations", "clear_cache"]

N_QUAD = 5  # Gauss-Legendre points per axis inside each magnet
N_PHI = 12  # azimuthal points inside cylinders and rings
_CACHE: dict = {}
_LOCK = threading.Lock()
_CACHE_MAX = 256


def _quad_points(shape: str, size: Sequence[float], position: Sequence[float],
                 n: int = N_QUAD) -> tuple[np.ndarray, np.ndarray]:
    """Interior quadrature points (q, 3) [m] and weights (q,) summing to 1."""
    x, w = np.polynomial.legendre.leggauss(n)
    w = w / 2.0
    pos = np.asarray(position, dtype=float)
    if shape == "cuboid":
        a, b, c = (float(s) / 2 for s in size)
        X, Y, Z = np.meshgrid(a * x, b * x, c * x, indexing="ij")
        W = np.einsum("i,j,k->ijk", w, w, w)
        return np.column_stack([X.ravel(), Y.ravel(), Z.ravel()]) + pos, W.ravel()
    ro = float(size[0]) / 2
    ri = float(size[1]) / 2 if shape == "ring" else 0.0
    h = float(size[-1]) / 2
    r = 0.5 * (ro + ri) + 0.5 * (ro - ri) * x
    wr = w * r / np.sum(w * r)  # area weight r dr, normalised
    phi = (np.arange(N_PHI) + 0.5) * 2 * math.pi / N_PHI
    R, P, Z = np.meshgrid(r, phi, h * x, indexing="ij")
    W = np.einsum("i,j,k->ijk", wr, np.full(N_PHI, 1.0 / N_PHI), w)
    pts = np.column_stack([(R * np.cos(P)).ravel(), (R * np.sin(P)).ravel(), Z.ravel()])
    return pts + pos, W.ravel()


def _key(magnets, plate_z) -> tuple:
    return (tuple((m.shape, tuple(float(s) for s in m.size), tuple(float(p) for p in m.position))
                  for m in magnets), None if plate_z is None else float(plate_z))


def interaction_matrix(magnets, plate_z: float | None = None, n: int = N_QUAD) -> np.ndarray:
    """Volume-averaged interaction ``A`` (n_mag, 3, n_mag, 3) [T/T].

    ``A[i, :, j, k]`` is the mean over magnet ``i`` of ``mu0 H`` made by magnet ``j``
    with unit polarisation along axis ``k`` (and its image in an ideal steel plate whose
    surface is at ``plate_z``, when given). Columns ``k = 0, 1`` of cylinders and rings
    are zero (they are polarised along z only). Pairs with the same shapes, sizes and
    offset (a regular array has few) are evaluated once.

    Parameters
    ----------
    magnets : sequence
        Objects with ``shape``, ``size``, ``position`` (as ``Arrangement.magnets``) [m].
    plate_z : float, optional
        Back plate surface [m].

    References
    ----------
    .. [1] O. Chadebec, J.-L. Coulomb and F. Janet, IEEE Trans. Magn. 42, 515 (2006).
    .. [2] A. Aharoni, J. Appl. Phys. 83, 3432 (1998).
    """
    mags = list(magnets)
    nm = len(mags)
    types: dict = {}
    tid = []
    for m in mags:
        t = (m.shape, tuple(float(v) for v in m.size))
        tid.append(types.setdefault(t, len(types)))
    tlist = list(types)
    quads = [_quad_points(t[0], t[1], (0.0, 0.0, 0.0), n) for t in tlist]
    pos = np.array([m.position for m in mags], dtype=float)
    scale = max(max(t[1]) for t in tlist)
    # unique (source type, target type, offset, image) -> pairs
    groups: dict = {}
    for j in range(nm):
        srcs = [(pos[j], False)]
        if plate_z is not None:
            srcs.append((np.array([pos[j, 0], pos[j, 1], 2.0 * plate_z - pos[j, 2]]), True))
        for sp, img in srcs:
            off = pos - sp  # target centre relative to the source centre
            for i in range(nm):
                key = (tid[j], tid[i], img, tuple(np.round(off[i] / scale, 12)))
                groups.setdefault(key, []).append((i, j, off[i]))
    A = np.zeros((nm, 3, nm, 3))
    by_src: dict = {}
    for key, pairs in groups.items():
        by_src.setdefault((key[0], key[2]), []).append(key)
    for (ts, img), keys in by_src.items():
        shape, size = tlist[ts]
        comps = (0, 1, 2) if shape == "cuboid" else (2,)
        pts, seg = [], []
        for gi, key in enumerate(keys):
            q, _ = quads[key[1]]
            pts.append(q + groups[key][0][2])
            seg.append(np.full(q.shape[0], gi))
        p_all = np.concatenate(pts)
        seg_all = np.concatenate(seg)
        w_all = np.concatenate([quads[key[1]][1] for key in keys])
        for k in comps:
            e = np.zeros(3)
            e[k] = 1.0
            pol = e * np.array([-1.0, -1.0, 1.0]) if img else e
            ms = MagnetSet([shape], [size], pol[None, :], np.zeros((1, 3)))
            b = ms.B(p_all)
            if not img:  # mu0 H = B - J inside the source itself
                inside = ms.owner(p_all) == 0
                b[inside] -= pol
            avg = np.stack([np.bincount(seg_all, weights=w_all * b[:, c], minlength=len(keys))
                            for c in range(3)], axis=1)
            for gi, key in enumerate(keys):
                for i, j, _ in groups[key]:
                    A[i, :, j, k] += avg[gi]
    return A


def response_matrix(magnets, chis: Sequence[float], plate_z: float | None = None
                    ) -> np.ndarray:
    """``S = (I - X A)^-1`` (3 n_mag, 3 n_mag): ``J = S J_r`` (flattened per magnet).

    Cached per geometry and recoil susceptibilities (thread-safe); rows and columns of
    the transverse components of cylinders and rings are identity (kept as given).

    Parameters
    ----------
    chis : sequence of float
        Recoil susceptibility ``mu_rec - 1`` per magnet [1].

    References
    ----------
    .. [1] O. Chadebec, J.-L. Coulomb and F. Janet, IEEE Trans. Magn. 42, 515 (2006).
    """
    mags = list(magnets)
    chis_t = tuple(float(c) for c in chis)
    key = (_key(mags, plate_z), chis_t)
    with _LOCK:
        s = _CACHE.get(key)
    if s is not None:
        return s
    nm = len(mags)
    A = interaction_matrix(mags, plate_z).reshape(3 * nm, 3 * nm)
    free = np.ones(3 * nm, dtype=bool)
    for i, m in enumerate(mags):
        if m.shape != "cuboid":
            free[3 * i:3 * i + 2] = False
    X = np.repeat(np.asarray(chis_t), 3)
    M = np.eye(3 * nm)
    f = np.nonzero(free)[0]
    M[np.ix_(f, f)] -= X[f, None] * A[np.ix_(f, f)]
    s = np.linalg.inv(M)
    with _LOCK:
        if len(_CACHE) >= _CACHE_MAX:
            _CACHE.pop(next(iter(_CACHE)))
        _CACHE[key] = s
    return s


def effective_polarizations(magnets, chis: Sequence[float], plate_z: float | None = None
                            ) -> np.ndarray:
    """Uniform polarisation of each magnet on its recoil line, (n_mag, 3) [T].

    ``J = S J_r`` with ``J_r`` each magnet's ``polarization`` (remanence times its
    direction) and ``S`` from :func:`response_matrix`.

    References
    ----------
    .. [1] O. Chadebec, J.-L. Coulomb and F. Janet, IEEE Trans. Magn. 42, 515 (2006).
    """
    mags = list(magnets)
    jr = np.array([m.polarization for m in mags], dtype=float).ravel()
    s = response_matrix(mags, chis, plate_z)
    return (s @ jr).reshape(-1, 3)


def clear_cache() -> None:
    """Forget every cached response matrix."""
    with _LOCK:
        _CACHE.clear()
