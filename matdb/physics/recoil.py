"""Recoil permeability: the magnets' own demagnetisation in the field model.

A permanent magnet on its recoil line has ``J = J_r + chi_rec mu0 H`` with the
recoil susceptibility ``chi_rec = mu_rec - 1`` (``mu_rec`` from the grade table) and
``H`` the field inside it, from itself and from its neighbours. The idealised
("rigid") model takes ``J = J_r``.

Method
------
Each cuboid magnet is cut into near-cubic equal cells, ``n`` along its longest edge
(``n`` = ``subdivision``, default :data:`SUBDIVISION`; cylinders and rings stay one
cell), each cell given one uniform
polarisation ``J_c`` (a Galerkin projection of the integral equation of
magnetostatics onto piecewise-constant polarisations over the subdivided magnets: the
method of moments with volume-averaged rather than point-matched interaction [1]_ [2]_):

    J_c = J_r,c + chi_c < mu0 H >_c,    < mu0 H >_c = sum_d A_cd J_d,

where ``A_cd`` (3 x 3) is the volume average over cell ``c`` of ``mu0 H`` made by cell
``d`` polarised with unit ``J`` along each axis (``-N`` for ``c = d``, ``N`` the
magnetometric demagnetising tensor of the cell [3]_), evaluated with the closed-form
fields of :mod:`matdb.physics.fields` at Gauss-Legendre points inside each cell (images
in a steel back plate included; the pairs of a regular grid share few distinct offsets,
each evaluated once). The interaction ``A`` depends on the geometry only and is kept for every recoil
susceptibility; the linear system ``(I - X A) J = J_r`` is solved by its Neumann series
(``|X A|`` is about ``chi_rec``: a few matrix products for NdFeB, SmCo and ferrite; LU
otherwise) once per geometry and susceptibilities (cached), and since it is linear in
``J_r`` the response ``R`` (cells x magnets) is kept and reused for every remanence
(temperature, minimum-spec worst case): ``J = R J_r``. Cylinders and rings keep their polarisation
along their axis (only the axial part of the equation is solved for them).

Each magnet's mean polarisation (its total moment, right to first order in ``chi_rec``)
is what the magnets of :meth:`Arrangement.with_recoil` carry; the cells' departures
from it (stronger demagnetisation near the face centres and next to opposite
neighbours) make a field of a few per cent of B, which
:mod:`matdb.physics.recoil_field` tabulates once per geometry above the magnets (exact
cell by cell elsewhere), so the default model costs little more than the rigid one
once the table exists. Checked against the moment method of
magpylib-material-response on meshed magnets in ``tests/test_recoil.py``.

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

import hashlib
import math
import threading
from dataclasses import dataclass
from pathlib import Path
from typing import Sequence

import numpy as np

from matdb.paths import cache_root
from matdb.physics.fields import MagnetSet
from matdb.physics.quadrature import gauss_legendre

__all__ = [
    "SUBDIVISION",
    "ACCURATE_SUBDIVISION",
    "cell_counts",
    "interaction_matrix",
    "response_matrix",
    "effective_polarizations",
    "polarization_cells",
    "subdivide",
    "clear_cache",
]

#: Cells along the longest edge of each cuboid magnet in the default model (reduced until
#: the arrangement has at most :data:`MAX_CELLS` cells; 1: one uniform polarisation per
#: magnet). Measured lift reduction of a 10 mm graphite plate at 0.5 / 1 mm over a 2 x 2
#: checkerboard of 12.7 mm N42 cubes (chi_rec 0.05): n = 1: 2.2 / 2.2 %; n = 3: 2.7 /
#: 2.9 %; n = 4: 3.2 / 3.4 %; n = 5: 3.55 / 3.81 % (equal to magpylib-material-response at
#: the same meshing); n = 6: 3.85 / 4.07 %; n = 7: 4.03 / 4.25 %. The subdivision
#: converges slowly next to the shared edges of opposite neighbours (the reverse field there
#: diverges logarithmically); a single cube is converged at n = 5 (5.81 / 5.50 %; n = 8:
#: 5.81 / 5.57 %). Its cost is kept down by sharing: see :mod:`matdb.physics.recoil_field`
#: and README "Recoil permeability" (``advise`` 17 mm cold 2.9x the one-cell model).
SUBDIVISION = 5
#: The accurate model of one design (the default; kept as a name for callers).
ACCURATE_SUBDIVISION = 5
#: Upper bound on the number of cells of one solve (the dense system is 3 x cells).
MAX_CELLS = 512
SERIES_MAX = 40  # Neumann-series steps before falling back to LU
SERIES_TOL = 1e-13  # last step of the series relative to the remanence
GMRES_COLUMNS = 4  # right-hand sides up to which GMRES replaces LU when the series is slow
GMRES_TOL = 1e-12  # relative residual of GMRES (I - X A has its spectrum in [1, 1 + chi])
GMRES_RESTART = 60
GMRES_MAXITER = 10
N_QUAD = 5  # Gauss-Legendre points per axis inside a magnet solved as one cell
N_QUAD_CELL = 3  # ... inside each cell of a subdivided magnet
N_PHI = 12  # azimuthal points inside cylinders and rings
_CACHE: dict = {}
_LOCK = threading.Lock()
_CACHE_MAX = 256
_A_CACHE: dict = {}  # interaction matrices (tens of MB each): a few
_A_CACHE_MAX = 4
KEY_DIGITS = 9  # geometry keys: lengths in units of the largest magnet edge, rounded
CODE_VERSION = "recoil-2"  # with the source hash: what the stored solutions were computed by


@dataclass(frozen=True)
class Cell:
    """One cell of the moment method: a magnet or a part of one (SI).

    ``magnet`` is the index of the magnet it belongs to; ``shape``/``size``/``position``
    as for :class:`matdb.physics.arrangement.Magnet`.
    """

    shape: str
    size: tuple
    position: tuple
    magnet: int


def volume_quadrature(shape: str, size: Sequence[float], position: Sequence[float],
                      n: int = N_QUAD) -> tuple[np.ndarray, np.ndarray]:
    """Interior points and weights for the volume mean over one magnet or cell.

    Parameters
    ----------
    shape : str
        ``"cuboid"``, ``"cylinder"`` or ``"ring"``.
    size, position : sequence of float
        As for :class:`matdb.physics.arrangement.Magnet` [m].
    n : int
        Gauss-Legendre points per axis (cylinders and rings add ``N_PHI`` azimuthal
        points).

    Returns
    -------
    (points (q, 3) [m], weights (q,) summing to 1)

    References
    ----------
    .. [1] G. H. Golub and J. H. Welsch, Math. Comp. 23, 221 (1969) (Gauss-Legendre).
    """
    x, w = gauss_legendre(n)
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


def cell_counts(size: Sequence[float], n: int) -> tuple[int, int, int]:
    """Cells along x, y, z of a cuboid cut with ``n`` cells along its longest edge and
    near-cubic cells (at least one per axis)."""
    s = np.asarray(size, dtype=float)
    return tuple(int(v) for v in np.maximum(1, np.rint(n * s / s.max())))  # type: ignore[return-value]


def subdivide(magnets, n: int) -> list[Cell]:
    """Cells of the magnets: each cuboid cut into near-cubic equal cells, ``n`` along its
    longest edge (:func:`cell_counts`), in (x, y, z) index order; cylinders and rings kept
    whole (axial polarisation only). (Cached: callers must not change the list.)"""
    key = ("cells", tuple((m.shape, tuple(m.size), tuple(m.position)) for m in magnets), n)
    with _LOCK:
        hit = _CACHE.get(key)
    if hit is None:
        hit = _subdivide(magnets, n)
        with _LOCK:
            if len(_CACHE) >= _CACHE_MAX:
                _CACHE.pop(next(iter(_CACHE)))
            _CACHE[key] = hit
    return hit


def _subdivide(magnets, n: int) -> list[Cell]:
    cells = []
    for i, m in enumerate(magnets):
        size = tuple(float(v) for v in m.size)
        if m.shape != "cuboid" or n == 1:
            cells.append(Cell(m.shape, size, tuple(float(p) for p in m.position), i))
            continue
        k = cell_counts(size, n)
        h = np.asarray(size) / np.asarray(k)
        X, Y, Z = np.meshgrid(*[((np.arange(k[a]) + 0.5) / k[a] - 0.5) * size[a] for a in range(3)],
                              indexing="ij")
        centres = np.column_stack([X.ravel(), Y.ravel(), Z.ravel()]) + np.asarray(m.position, dtype=float)
        cells.extend(Cell("cuboid", tuple(h), tuple(c), i) for c in centres.tolist())
    return cells


def _subdivision(magnets, subdivision: int | None) -> int:
    """The subdivision asked for, reduced (never below 1) to stay within MAX_CELLS."""
    n = SUBDIVISION if subdivision is None else int(subdivision)

    def count(k):
        return sum(int(np.prod(cell_counts(m.size, k))) if m.shape == "cuboid" else 1 for m in magnets)

    while n > 1 and count(n) > MAX_CELLS:
        n -= 1
    return max(n, 1)


def length_scale(magnets) -> float:
    """The arrangement's unit of length: the largest edge or diameter of its magnets [m].

    Magnetostatics has no length of its own: ``B(l r; l geometry) = B(r; geometry)`` for
    the same polarisations, so the interaction matrix, the recoil response and the
    departure-field tables are computed on the geometry in this unit and shared by every
    size of one shape and pattern."""
    return float(max(max(float(s) for s in m.size) for m in magnets))


def _round(v: float) -> float:
    return round(float(v), KEY_DIGITS) + 0.0


def _key(magnets, plate_z) -> tuple:
    """The geometry in units of :func:`length_scale` (rounded): equal for scaled copies."""
    scale = length_scale(magnets)
    return (tuple((m.shape, tuple(_round(s / scale) for s in m.size),
                   tuple(_round(p / scale) for p in m.position)) for m in magnets),
            None if plate_z is None else _round(plate_z / scale))


def _scaled_cells(cells, scale: float) -> list[Cell]:
    return [Cell(c.shape, tuple(s / scale for s in c.size), tuple(p / scale for p in c.position), c.magnet)
            for c in cells]


_FINGERPRINT: str | None = None


def code_fingerprint() -> str:
    """Hash of the source of the field and recoil modules: stored solutions and tables
    computed by other code are never read."""
    global _FINGERPRINT
    if _FINGERPRINT is None:
        here = Path(__file__).resolve().parent
        h = hashlib.sha256(CODE_VERSION.encode())
        for f in [here / "recoil.py", here / "recoil_field.py", *sorted((here / "fields").glob("*.py"))]:
            h.update(f.name.encode())
            h.update(f.read_bytes())
        _FINGERPRINT = h.hexdigest()[:16]
    return _FINGERPRINT


_DISKS: dict = {}


def disk_cache():
    """The on-disk store of recoil solutions and departure-field tables
    (:func:`matdb.paths.cache_root` / ``recoil``; one :class:`diskcache.Cache` per folder
    and process), or None when it cannot be opened (then everything is recomputed)."""
    folder = str(cache_root() / "recoil")
    with _LOCK:
        if folder not in _DISKS:
            try:
                import diskcache  # lazy: only when a subdivided model is solved

                _DISKS[folder] = diskcache.Cache(folder)
            except Exception:  # an unusable cache folder: compute without one
                _DISKS[folder] = None
        return _DISKS[folder]


def disk_folder() -> Path | None:
    """Folder of the departure-field tables' values (beside :func:`disk_cache`), or None
    when there is no usable cache."""
    return None if disk_cache() is None else cache_root() / "recoil" / "tables"


def disk_get(key: str):
    """A stored value, or None (missing, unreadable or damaged: recomputed, never trusted)."""
    c = disk_cache()
    if c is None:
        return None
    try:
        return c.get(key)
    except Exception:
        return None


def disk_set(key: str, value) -> None:
    """Store ``value`` (a failure to write only costs a recomputation later)."""
    c = disk_cache()
    if c is None:
        return
    try:
        c.set(key, value)
    except Exception:
        pass


def interaction_matrix(cells, plate_z: float | None = None, n: int = N_QUAD) -> np.ndarray:
    """Volume-averaged interaction ``A`` (n_cell, 3, n_cell, 3) [T/T].

    ``A[i, :, j, k]`` is the mean over cell ``i`` of ``mu0 H`` made by cell ``j``
    with unit polarisation along axis ``k`` (and its image in an ideal steel plate whose
    surface is at ``plate_z``, when given), by an ``n``-point Gauss-Legendre rule per
    axis in cell ``i``. Columns ``k = 0, 1`` of cylinders and rings are zero (they are
    polarised along z only). Pairs with the same shapes, sizes and offset (a regular
    grid of cells has few) are evaluated once, all of them in one call per source shape.

    Parameters
    ----------
    cells : sequence
        Objects with ``shape``, ``size``, ``position`` (:class:`Cell`, or the magnets of
        an ``Arrangement``) [m].
    plate_z : float, optional
        Back plate surface [m].

    References
    ----------
    .. [1] O. Chadebec, J.-L. Coulomb and F. Janet, IEEE Trans. Magn. 42, 515 (2006).
    .. [2] A. Aharoni, J. Appl. Phys. 83, 3432 (1998).
    """
    cl = list(cells)
    nc = len(cl)
    types: dict = {}
    tid = np.array([types.setdefault((c.shape, tuple(float(v) for v in c.size)), len(types)) for c in cl])
    tlist = list(types)
    quads = [volume_quadrature(t[0], t[1], (0.0, 0.0, 0.0), n) for t in tlist]
    nq = quads[0][0].shape[0]
    pos = np.array([c.position for c in cl], dtype=float)
    scale = max(max(t[1]) for t in tlist)
    A = np.zeros((nc, 3, nc, 3))
    for ts, (shape, size) in enumerate(tlist):
        src = np.nonzero(tid == ts)[0]
        comps = (0, 1, 2) if shape == "cuboid" else (2,)
        for img in ([False, True] if plate_z is not None else [False]):
            spos = pos[src].copy()
            if img:
                spos[:, 2] = 2.0 * plate_z - spos[:, 2]
            off = (pos[None, :, :] - spos[:, None, :]).reshape(-1, 3)  # target - source
            ttype_all = np.tile(tid, src.size)
            key = ttype_all.astype(np.int64)
            for ax in range(3):  # one integer key per (target type, offset): 1-d unique
                _, rank = np.unique(np.round(off[:, ax] / scale * 1e9), return_inverse=True)
                key = key * (int(rank.max()) + 1) + rank.ravel()
            _, first, inverse = np.unique(key, return_index=True, return_inverse=True)
            inverse = inverse.ravel()
            ttype = ttype_all[first]
            # quadrature points of every distinct (target shape, offset), one call per k
            pts = np.concatenate([quads[t][0] for t in ttype]) + np.repeat(off[first], nq, axis=0)
            wts = np.concatenate([quads[t][1] for t in ttype])
            avg = np.zeros((first.size, 3, 3))
            for k in comps:
                e = np.zeros(3)
                e[k] = 1.0
                pol = e * np.array([-1.0, -1.0, 1.0]) if img else e
                ms = MagnetSet([shape], [size], pol[None, :], np.zeros((1, 3)))
                b = ms.B(pts)
                if not img:  # mu0 H = B - J inside the source itself
                    b[ms.owner(pts) == 0] -= pol
                avg[:, :, k] = (b * wts[:, None]).reshape(first.size, nq, 3).sum(axis=1)
            block = avg[inverse].reshape(src.size, nc, 3, 3)  # (source, target, comp, k)
            A[:, :, src, :] += block.transpose(1, 2, 0, 3)
    return A


def _solve(K: np.ndarray, E: np.ndarray, x: float | None = None) -> np.ndarray:
    """``(I - K)^-1 E`` for ``K = X A``: by the Neumann series ``R <- E + K R`` while it
    contracts fast (small recoil susceptibility: a few matrix products instead of a
    factorisation), else by LU (numpy.linalg.solve). ``x``: ``K`` is ``x A`` with ``A``
    given as ``K`` (one susceptibility: the product is not formed)."""
    R = E.copy()
    scale = float(np.max(np.abs(E)))
    prev = np.inf
    for _ in range(SERIES_MAX if E.shape[1] > GMRES_COLUMNS else 0):
        nxt = K @ R
        if x is not None:
            nxt *= x
        nxt += E
        step = float(np.max(np.abs(nxt - R)))
        R = nxt
        if step <= SERIES_TOL * scale:
            return R
        if step > 0.5 * prev:  # slow or diverging: factorise instead
            break
        prev = step
    if E.shape[1] <= GMRES_COLUMNS:  # few right-hand sides: Krylov iterations, no factorisation
        from scipy.sparse.linalg import LinearOperator, gmres  # lazy: only for large chi_rec

        f = 1.0 if x is None else x
        op = LinearOperator(K.shape, matvec=lambda v: v - f * (K @ v), dtype=float)
        cols = []
        for j in range(E.shape[1]):
            sol, info = gmres(op, E[:, j], x0=E[:, j].copy(), rtol=GMRES_TOL, atol=0.0,
                              restart=GMRES_RESTART, maxiter=GMRES_MAXITER)
            if info != 0:
                break
            cols.append(sol)
        else:
            return np.column_stack(cols)
    M = -K if x is None else K * -x
    M[np.diag_indices_from(M)] += 1.0
    return np.linalg.solve(M, E)


def _cell_response(magnets, chis: tuple, plate_z: float | None, n: int, jr: np.ndarray | None = None):
    """Cells and ``R`` (3 n_cell, 3 n_mag): cell polarisations ``J = R J_r`` (cached in
    memory by the geometry in units of :func:`length_scale`, and on disk when the magnets
    are subdivided). With ``jr`` (the magnets' remanent polarisations, (3 n_mag,)): the
    cells' polarisations for it alone, (3 n_cell,) (one right-hand side, solved for its
    direction and cached by it: every uniform scaling of the remanences, such as a
    temperature or the minimum-spec worst case, shares it)."""
    mags = list(magnets)
    gkey = _key(mags, plate_z)
    size = 1.0
    if jr is not None:
        size = float(np.max(np.abs(jr)))
        if size == 0.0:
            cells = subdivide(mags, n)
            return cells, np.array([c.magnet for c in cells]), np.zeros(3 * len(cells))
        jr = np.asarray(jr, dtype=float) / size
    key = (gkey, chis, n, None if jr is None else tuple(np.round(jr, 12) + 0.0))
    with _LOCK:
        hit = _CACHE.get(key)
    cells = subdivide(mags, n)
    if hit is not None:
        return cells, hit[0], hit[1] * size
    nc, nm = len(cells), len(mags)
    owner = np.array([c.magnet for c in cells])
    shape = (3 * nc, 3 * nm) if jr is None else (3 * nc,)
    dkey = None
    if nc > nm:  # a subdivided solve (seconds at most): kept on disk too
        dkey = "response-" + hashlib.sha256(repr((key, code_fingerprint())).encode()).hexdigest()[:32]
        got = disk_get(dkey)
        if isinstance(got, np.ndarray) and got.shape == shape:
            with _LOCK:
                _CACHE[key] = (owner, got)
            return cells, owner, got * size
    akey = ("A", gkey, n)  # independent of the susceptibilities: shared by every grade
    with _LOCK:
        A = _A_CACHE.get(akey)
    if A is None:
        scale = length_scale(mags)  # dimensionless: computed on the geometry in that unit
        A = interaction_matrix(_scaled_cells(cells, scale), None if plate_z is None else plate_z / scale,
                               N_QUAD if n == 1 else N_QUAD_CELL).reshape(3 * nc, 3 * nc)
        with _LOCK:
            if len(_A_CACHE) >= _A_CACHE_MAX:
                _A_CACHE.pop(next(iter(_A_CACHE)))
            _A_CACHE[akey] = A
    free = np.ones(3 * nc, dtype=bool)
    for i, c in enumerate(cells):
        if c.shape != "cuboid":
            free[3 * i:3 * i + 2] = False
    E = np.zeros((3 * nc, 3 * nm))  # each cell starts from its magnet's remanence
    rows = np.arange(3 * nc)
    E[rows, 3 * np.repeat(owner, 3) + np.tile(np.arange(3), nc)] = 1.0
    if jr is not None:
        E = E @ jr[:, None]
    if free.all() and len(set(chis)) == 1:  # one susceptibility: K = chi A, never formed
        R = _solve(A, E, float(chis[0]))
    else:
        X = np.repeat(np.asarray(chis)[owner], 3) * free  # transverse rows of cylinders: none
        K = X[:, None] * A
        if not free.all():
            K[:, ~free] = 0.0
        R = _solve(K, E)
    if jr is not None:
        R = R[:, 0]
    with _LOCK:
        if len(_CACHE) >= _CACHE_MAX:
            _CACHE.pop(next(iter(_CACHE)))
        _CACHE[key] = (owner, R)
    if dkey is not None:
        disk_set(dkey, R)
    return cells, owner, R * size


def response_matrix(magnets, chis: Sequence[float], plate_z: float | None = None,
                    subdivision: int | None = None) -> np.ndarray:
    """``S`` (3 n_mag, 3 n_mag): each magnet's mean polarisation ``J = S J_r`` (flattened
    per magnet).

    The magnets are cut into ``subdivision``^3 cells each (default :data:`SUBDIVISION`,
    reduced to keep within :data:`MAX_CELLS`; 1 is the one-cell model), the system
    ``(I - X A) J = J_r`` is solved once per geometry and recoil susceptibilities (cached,
    thread-safe) and ``S`` is the volume mean of the cells' response over each magnet. Rows
    and columns of the transverse components of cylinders and rings are identity.

    Parameters
    ----------
    chis : sequence of float
        Recoil susceptibility ``mu_rec - 1`` per magnet [1].

    References
    ----------
    .. [1] O. Chadebec, J.-L. Coulomb and F. Janet, IEEE Trans. Magn. 42, 515 (2006).
    """
    mags = list(magnets)
    n = _subdivision(mags, subdivision)
    key = ("mean", _key(mags, plate_z), tuple(float(c) for c in chis), n)
    with _LOCK:
        s = _CACHE.get(key)
    if s is not None:
        return s
    cells, owner, R = _cell_response(mags, key[2], plate_z, n)
    counts = np.bincount(owner, minlength=len(mags)).astype(float)
    s = np.zeros((3 * len(mags), R.shape[1]))
    for a in range(3):
        np.add.at(s, 3 * owner + a, R[a::3])
    s /= np.repeat(counts, 3)[:, None]
    with _LOCK:
        _CACHE[key] = s
    return s


def effective_polarizations(magnets, chis: Sequence[float], plate_z: float | None = None,
                            subdivision: int | None = None) -> np.ndarray:
    """Mean polarisation of each magnet on its recoil line, (n_mag, 3) [T].

    ``J = S J_r`` with ``J_r`` each magnet's ``polarization`` (remanence times its
    direction) and ``S`` from :func:`response_matrix`.

    References
    ----------
    .. [1] O. Chadebec, J.-L. Coulomb and F. Janet, IEEE Trans. Magn. 42, 515 (2006).
    """
    mags = list(magnets)
    n = _subdivision(mags, subdivision)
    jr = np.array([m.polarization for m in mags], dtype=float).ravel()
    _, owner, J = _cell_response(mags, tuple(float(c) for c in chis), plate_z, n, jr)
    return _means(J, owner, len(mags))


def _means(J: np.ndarray, owner: np.ndarray, count: int) -> np.ndarray:
    """Each magnet's mean over its (equal) cells, (count, 3)."""
    J = J.reshape(-1, 3)
    per = np.bincount(owner, minlength=count).astype(float)
    out = np.zeros((count, 3))
    np.add.at(out, owner, J)
    return out / per[:, None]


def polarization_cells(magnets, chis: Sequence[float], plate_z: float | None = None,
                       subdivision: int | None = None):
    """The non-uniform part of the solved polarisation, per cell, for the field model.

    Each cell's departure ``dJ`` from its magnet's mean polarisation: the field of the
    magnets on their recoil lines is the field of the magnets with their mean
    polarisation plus that of these cells.

    Returns
    -------
    (sizes (k, 3) [m], centres (k, 3) [m], dJ (k, 3) [T], magnet index (k,)), or None
    when nothing is subdivided.
    """
    mags = list(magnets)
    n = _subdivision(mags, subdivision)
    if n == 1 or not any(m.shape == "cuboid" for m in mags):
        return None
    chis_t = tuple(float(c) for c in chis)
    jr = np.array([m.polarization for m in mags], dtype=float).ravel()
    cells, owner, J = _cell_response(mags, chis_t, plate_z, n, jr)
    J = J.reshape(-1, 3)
    mean = _means(J, owner, len(mags))
    per = np.bincount(owner, minlength=len(mags))
    sel = np.array([c.shape == "cuboid" for c in cells]) & (per[owner] > 1)
    sizes = np.array([c.size for c, k in zip(cells, sel) if k], dtype=float)
    centres = np.array([c.position for c, k in zip(cells, sel) if k], dtype=float)
    idx = owner[sel]
    return sizes, centres, J[sel] - mean[idx], idx


def clear_cache() -> None:
    """Forget every cached response and interaction matrix."""
    with _LOCK:
        _CACHE.clear()
        _A_CACHE.clear()
