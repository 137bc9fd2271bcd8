"""Field of the non-uniform part of the magnets' polarisation, tabulated once per geometry.

The moment method of :mod:`matdb.physics.recoil` leaves each magnet with a mean
polarisation (carried by the magnets themselves) and, per cell, a small departure ``dJ``
from it (a few per cent of B above the magnets). Evaluated exactly, the departures are one
extra cuboid source per cell (hundreds for a 2 x 2 array cut into 5^3 cells each), which
multiplies the cost of every field evaluation. Above the magnets the departure field is a
potential field of sources that all lie below the top face, so it is fixed by its
two-dimensional spectrum there and continued upwards analytically [1]_ [2]_:

    B^(k, z) = 1/2 u (u . S(k)) / |k| exp(-|k| (z - z_top)),   u = (i k_x, i k_y, -|k|),

    S(k) = sum_c dJ_c s_x,c s_y,c sinc(k_x s_x,c / 2) sinc(k_y s_y,c / 2)
           exp(-i k . x_c) exp(-|k| (z_top - z_t,c)) (1 - exp(-|k| s_z,c)) / |k|,

the closed-form spectrum of a uniformly polarised rectangular prism [2]_ (cell ``c``:
sizes ``s``, centre ``x_c``, top ``z_t,c``; images in a steel back plate are more
cells). :class:`CorrectionField` sums ``S(k)`` once on an FFT grid (the cells share few
distinct x, y positions: the sum is three small tensor contractions), continues it to a
stack of heights spaced geometrically above the top face, transforms back
(``scipy.fft``, single precision) and keeps the values over the region a plate can
occupy; a point is then one trilinear interpolation in x, y and the level index, of every
table of the geometry at once. Points outside that region (inside or beside the magnets,
far away, high above) are evaluated exactly from the cells.

Sharing (what keeps the default model cheap): the tables are built on the geometry in
units of its largest magnet edge (``B(l r; l geometry) = B(r; geometry)``: every size of
one shape and pattern reads the same table), and one geometry keeps a small orthonormal
basis of departure patterns with one table each (:class:`_Basis`): a departure is read as
its projection on the basis when the part outside is below :data:`BASIS_TOL` of the
field's scale, else that part gets a table. The recoil susceptibilities of the catalogue
(0.05 to 2.6) need two or three tables per pattern. Tables are kept as ``.npy`` files
beside the disk cache of :func:`matdb.physics.recoil.disk_cache`.

The table is band-limited at the grid's Nyquist wavenumber (a cosine taper over its upper
half): within about ``3 h`` of the top face (``h`` the grid spacing, a cell's width over
:data:`CELL_NODES`) it is the field of the departures smoothed over ``h``. There the exact cell field carries
the steps of the piecewise-constant cells, which are themselves an artefact of the
discretisation. The interpolation error is tested against the exact cell field in
``tests/test_recoil.py``.

References
----------
.. [1] R. J. Blakely, Potential Theory in Gravity and Magnetic Applications, Cambridge
   University Press (1995), ch. 11 (Fourier-domain fields of magnetised bodies; upward
   continuation).
.. [2] B. K. Bhattacharyya, "Continuous spectrum of the total-magnetic-field anomaly due
   to a rectangular prismatic body", Geophysics 31, 97-121 (1966).
"""

from __future__ import annotations

import hashlib
import math
import os
import threading

import numpy as np
from scipy import fft as sfft

from matdb.constants import MU0
from matdb.physics.fields import MagnetSet, dipole_B
from matdb.physics.recoil import code_fingerprint, disk_folder, disk_get, disk_set

__all__ = ["CorrectionField", "family_field", "CELL_NODES", "BASIS_TOL", "clear_tables", "table_count"]

#: Horizontal grid nodes per cell width (the grid spacing ``h`` is the narrowest cell's
#: width over this; coarser when the grid would exceed :data:`MAX_GRID`).
CELL_NODES = 10
#: Height levels transformed together.
LEVEL_CHUNK = 8
#: Largest FFT grid per axis.
MAX_GRID = 768
#: Relative spacing of the height levels (geometric above the first, ``h``).
Z_RATIO = 0.12
#: Horizontal margin of the table around the magnets, in units of the largest magnet edge
#: (and at least this fraction of the magnets' extent): at least :data:`FAR_FACTOR`, so a
#: point beside the table is in the point-dipole zone, never one for the cells one by one.
MARGIN_L = 1.0
MARGIN_FRAC = 0.35
#: Height of the table above the top face, in units of the largest magnet edge (and at
#: least twice the magnets' extent).
HEIGHT_L = 4.0
#: Beyond this many times the largest magnet's extent from the magnets, the cells are
#: point dipoles (:meth:`CorrectionField.far_set`).
FAR_FACTOR = 1.0
#: Departures are combined from the tables of earlier ones when their part outside the
#: span of those (2-norm over the cells) is below this fraction of their norm times the
#: magnets' polarisation over the largest departure (so the error is this fraction of the
#: field's scale, however large the departures); otherwise that part gets a table of its
#: own. Tested error bound: see ``tests/test_recoil.py``.
BASIS_TOL = 1e-3
_BASES: dict = {}  # departure bases, by geometry in units of the magnet size
_SHARED: dict = {}  # exact sources and dipoles, by real geometry and departures
_LOCK = threading.Lock()
_BASES_MAX = 16
_SHARED_MAX = 32
_BUILT = [0]  # basis tables computed by this process (table_count)


def clear_tables() -> None:
    """Forget every table held in memory (the disk cache stays)."""
    with _LOCK:
        _BASES.clear()
        _SHARED.clear()


def table_count() -> int:
    """How many basis tables this process has computed (not read from disk)."""
    return _BUILT[0]


def _sources(sizes, centres, dj, plate_z):
    """Cells plus their images in an ideal steel plate at ``plate_z`` (J' = (-Jx, -Jy, Jz))."""
    if plate_z is None:
        return sizes, centres, dj
    img_c = centres.copy()
    img_c[:, 2] = 2.0 * plate_z - img_c[:, 2]
    img_j = dj * np.array([-1.0, -1.0, 1.0])
    return (np.concatenate([sizes, sizes]), np.concatenate([centres, img_c]),
            np.concatenate([dj, img_j]))


#: A table whose values and mirror image (or diagonal image) differ by no more than this
#: fraction of its largest value is made exactly symmetric (:func:`_symmetrised`).
SYMMETRY_TOL = 1e-4


def _symmetrised(coef: np.ndarray, tol: float = SYMMETRY_TOL) -> np.ndarray:
    """``coef`` (level, x, y, component) made exactly symmetric under the reflections its
    sources have: the mirror planes through the middle of the grid and its diagonal.

    Reflecting the sources in ``x = x_mid`` turns a polarisation, a pseudo-vector, into
    ``(J_x, -J_y, -J_z)`` and the field the same way [1]_; in ``y = y_mid`` into
    ``(-J_x, J_y, -J_z)``; in the diagonal into ``(-J_y, -J_x, -J_z)``. When the sources are
    symmetric (up to one overall sign) the field is, but the single-precision transforms
    leave mirrored nodes unequal by their rounding (a few 1e-7 of the largest value), which
    breaks the exact symmetry the plate's quadrature folds rely on. Each reflection under
    which the table agrees with its image to ``tol`` of its largest value (far above that
    rounding, far below the departures of any asymmetric layout's field) replaces the table
    by the mean of the two: mirrored nodes then hold values equal to the last bit, and the
    table moves by less than ``tol / 2`` of its largest value. Tables of asymmetric sources
    are returned unchanged.

    References
    ----------
    .. [1] J. D. Jackson, Classical Electrodynamics, 3rd ed., Wiley (1999), sec. 6.10
       (B and M are axial vectors: their behaviour under reflection).
    """
    # judged on the lowest and the highest level (the lowest, next to the sources, shows any
    # asymmetry of theirs most and holds the largest values): comparing whole tables per
    # reflection cost about as much as the table's transforms
    probe = coef[[0, -1]]
    top = float(np.abs(probe).max())
    if top == 0.0:
        return coef
    images = [lambda c: c[:, ::-1, :, :] * np.array([1, -1, -1], dtype=c.dtype),
              lambda c: c[:, :, ::-1, :] * np.array([-1, 1, -1], dtype=c.dtype)]
    if coef.shape[1] == coef.shape[2]:
        images.append(lambda c: -np.swapaxes(c, 1, 2)[..., [1, 0, 2]])
    for image in images:
        m = image(probe)
        for sign in (1.0, -1.0):
            if float(np.abs(probe - sign * m).max()) <= tol * top:
                full = image(coef)  # a new array: (coef + sign * image) / 2 in place in it
                if sign > 0:
                    full += coef
                else:
                    np.subtract(coef, full, out=full)
                full *= np.float32(0.5)
                coef = full
                probe = coef[[0, -1]]
                break
    return np.ascontiguousarray(coef)


class _Table:
    """The departure field of unit departures on (level, x, y) nodes, in units of the
    geometry's largest magnet edge (float32)."""

    def __init__(self, sizes, centres, dj, top_z):
        lo = (centres - sizes / 2).min(axis=0)
        hi = (centres + sizes / 2).max(axis=0)
        extent = float(max(hi[0] - lo[0], hi[1] - lo[1]))
        margin = max(MARGIN_L, MARGIN_FRAC * extent)
        h = float(np.min(sizes[:, :2])) / CELL_NODES
        box_w = extent + 2 * margin
        period = box_w + extent + margin
        while period / h > MAX_GRID:
            h *= 1.25
        n = sfft.next_fast_len(int(math.ceil(period / h)), real=True)
        self.h = h
        # nodes symmetric about the middle of the magnets: a mirror-symmetric arrangement
        # keeps a mirror-symmetric table and interpolation
        mid = 0.5 * (lo[:2] + hi[:2])
        half = np.ceil((0.5 * (hi[:2] - lo[:2]) + margin) / h).astype(int)
        self.nb = 2 * half + 1
        self.origin = mid - half * h
        self.top = float(top_z)
        self.z0 = h
        z_span = max(HEIGHT_L, 2 * extent)
        nz = int(math.ceil(math.log1p(z_span / self.z0) / Z_RATIO)) + 1
        self.nz = nz
        self.z_hi = self.top + self.z0 * math.expm1(Z_RATIO * (nz - 1))
        levels = self.z0 * np.expm1(Z_RATIO * np.arange(nz))  # heights above the top face
        spec = self._spectrum(sizes, centres, dj, n)  # (n, n//2+1, 3) at the top face
        kx = 2 * np.pi * sfft.fftfreq(n, h)
        ky = 2 * np.pi * sfft.rfftfreq(n, h)
        kabs = np.hypot(kx[:, None], ky[None, :])
        k_nyq = np.pi / h
        t = np.clip((kabs / k_nyq - 0.5) / 0.5, 0.0, 1.0)
        taper = np.cos(0.5 * np.pi * t) ** 2
        taper[kabs >= k_nyq] = 0.0
        spec = spec * (taper / h ** 2)[:, :, None]
        # (component, k_y, k_x), single precision: the first inverse transform along
        # contiguous memory (mirrored nodes then differ by rounding: _symmetrised)
        spec = np.ascontiguousarray(np.transpose(spec, (2, 1, 0)), dtype=np.complex64)
        kabs_t = np.ascontiguousarray(kabs.T, dtype=np.float32)
        # (level, x, y, component): the eight corners of a point's cell are eight rows of
        # a (nodes, components) matrix, gathered for every table of the geometry at once
        coef = np.empty((nz, self.nb[0], self.nb[1], 3), dtype=np.float32)
        for j0 in range(0, nz, LEVEL_CHUNK):  # a few levels at a time: bounded memory
            zl = levels[j0:j0 + LEVEL_CHUNK].astype(np.float32)
            lev = spec[None] * np.exp(-kabs_t[None] * zl[:, None, None])[:, None]  # (l, c, ky, kx)
            # inverse along x, keep the table's rows, then along y (half spectrum)
            lev = sfft.ifft(lev, axis=3, workers=1)[..., :self.nb[0]]
            lev = np.ascontiguousarray(np.swapaxes(lev, 2, 3))  # (l, c, x, ky)
            vals = sfft.irfft(lev, n=n, axis=3, workers=1)[..., :self.nb[1]]  # (l, c, x, y)
            coef[j0:j0 + zl.size] = np.moveaxis(vals, 1, 3)
        self.coef = _symmetrised(coef)

    def _spectrum(self, sizes, centres, dj, n):
        """``B^`` at the top face on the rfft grid, (n, n//2+1, 3) (before the 1/h^2 of
        the discrete inverse transform)."""
        h = self.h
        kx = 2 * np.pi * sfft.fftfreq(n, h)
        ky = 2 * np.pi * sfft.rfftfreq(n, h)
        kabs = np.hypot(kx[:, None], ky[None, :])
        kz = np.where(kabs > 0, kabs, 1.0)
        total = np.zeros((n, ky.size, 3), dtype=complex)
        sxy = np.round(sizes[:, :2] / h * 1e9).astype(np.int64)
        _, tid = np.unique(sxy, axis=0, return_inverse=True)
        for t in np.unique(tid):
            sel = np.nonzero(tid.ravel() == t)[0]
            sx, sy = sizes[sel[0], 0], sizes[sel[0], 1]
            ux, ix = np.unique(np.round(centres[sel, 0] / h * 1e9), return_inverse=True)
            uy, iy = np.unique(np.round(centres[sel, 1] / h * 1e9), return_inverse=True)
            zt = centres[sel, 2] + sizes[sel, 2] / 2
            lay = np.column_stack([np.round((self.top - zt) / h * 1e9), np.round(sizes[sel, 2] / h * 1e9)])
            ul, il = np.unique(lay, axis=0, return_inverse=True)
            d = np.zeros((ux.size, uy.size, ul.shape[0], 3))
            np.add.at(d, (ix.ravel(), iy.ravel(), il.ravel()), dj[sel])
            xs = ux * h * 1e-9 - self.origin[0]
            ys = uy * h * 1e-9 - self.origin[1]
            ex = sx * np.sinc(kx * sx / (2 * np.pi))[:, None] * np.exp(-1j * kx[:, None] * xs[None, :])
            ey = sy * np.sinc(ky * sy / (2 * np.pi))[:, None] * np.exp(-1j * ky[:, None] * ys[None, :])
            depth = ul[:, 0] * h * 1e-9  # top face minus cell top
            sz = ul[:, 1] * h * 1e-9
            ez = np.exp(-kabs[:, :, None] * depth) * np.where(
                kabs[:, :, None] > 0, -np.expm1(-kabs[:, :, None] * sz) / kz[:, :, None], sz)
            a = np.einsum("ai,ijlc->ajlc", ex, d)
            a = np.einsum("bj,ajlc->ablc", ey, a)
            total += np.einsum("abl,ablc->abc", ez, a)
        w = 1j * kx[:, None] * total[:, :, 0] + 1j * ky[None, :] * total[:, :, 1] - kabs * total[:, :, 2]
        out = np.empty_like(total)
        out[:, :, 0] = 0.5j * kx[:, None] * w / kz
        out[:, :, 1] = 0.5j * ky[None, :] * w / kz
        out[:, :, 2] = -0.5 * w
        out[0, 0] = 0.0
        return out

    def covers(self, p: np.ndarray) -> np.ndarray:
        """Points inside the tabulated region (strictly above the top face)."""
        fx = (p[:, 0] - self.origin[0]) / self.h
        fy = (p[:, 1] - self.origin[1]) / self.h
        return ((fx >= 0) & (fx <= self.nb[0] - 1) & (fy >= 0) & (fy <= self.nb[1] - 1)
                & (p[:, 2] > self.top) & (p[:, 2] <= self.z_hi))

    def __getstate__(self) -> dict:  # the grid only: the values are stored as .npy
        state = dict(self.__dict__)
        state["coef"] = None
        return state

    def values(self) -> np.ndarray:
        """The tabulated field as (nodes, 3) [T per T of departure]."""
        return self.coef.reshape(-1, 3)

    def gather(self, q: np.ndarray, values) -> np.ndarray:
        """Trilinear interpolation (in x, y and the level index) of ``values``, a list of
        (nodes, m_j) arrays (tables on this grid), at points ``q`` (n, 3) in the table's
        units (inside :meth:`covers`); (n, sum m_j)."""
        f = np.empty((3, q.shape[0]))
        f[0] = np.log1p(np.maximum(q[:, 2] - self.top, 0.0) / self.z0) / Z_RATIO
        f[1] = (q[:, 0] - self.origin[0]) / self.h
        f[2] = (q[:, 1] - self.origin[1]) / self.h
        dims = np.array([self.nz, self.nb[0], self.nb[1]])
        np.clip(f, 0.0, (dims - 1)[:, None], out=f)
        i = np.minimum(f.astype(np.intp), (dims - 2)[:, None])
        t = f - i
        base = (i[0] * dims[1] + i[1]) * dims[2] + i[2]
        sz, sx = int(dims[1] * dims[2]), int(dims[2])
        widths = np.cumsum([0] + [v.shape[1] for v in values])
        out = np.zeros((q.shape[0], int(widths[-1])))  # (float32 values, double weights: exact mirrors)
        u = 1.0 - t
        for dz, wz in ((0, u[0]), (sz, t[0])):
            for dx, wx in ((0, u[1]), (sx, t[1])):
                w = wz * wx
                w0 = (w * u[2])[:, None]
                w1 = (w * t[2])[:, None]
                k = base + (dz + dx)
                for v, a, b in zip(values, widths[:-1], widths[1:]):
                    out[:, a:b] += w0 * v[k]
                    out[:, a:b] += w1 * v[k + 1]
        return out

    def __call__(self, p: np.ndarray) -> np.ndarray:
        """The tabulated field at ``p`` (n, 3) in the table's units, (n, 3)."""
        return self.gather(p, [self.values()])


def _hash(*arrays, extra=()) -> str:
    h = hashlib.sha1()
    for a in arrays:
        h.update(np.ascontiguousarray(a, dtype=float).tobytes())
    h.update(repr(extra).encode())
    return h.hexdigest()


def _store(key: str, vid: str, table: "_Table") -> None:
    """Keep a table on disk: its grid in the disk cache, its values as a .npy file
    (written whole, then renamed: a reader never sees half a file)."""
    folder = disk_folder()
    if folder is None:
        return
    try:
        folder.mkdir(parents=True, exist_ok=True)
        path = folder / f"{key}-{vid}.npy"
        tmp = path.with_suffix(f".{os.getpid()}.{threading.get_ident()}.tmp")
        with open(tmp, "wb") as fh:
            np.save(fh, table.coef)
        os.replace(tmp, path)
    except OSError:  # a cache that cannot be written only costs a recomputation later
        return
    disk_set(f"rtable-{key}-{vid}", table)


def _fetch(key: str, vid: str):
    """A stored table, or None (missing or damaged: recomputed, never trusted)."""
    folder = disk_folder()
    meta = disk_get(f"rtable-{key}-{vid}")
    if folder is None or not isinstance(meta, _Table):
        return None
    try:
        coef = np.load(folder / f"{key}-{vid}.npy", allow_pickle=False)
    except (OSError, ValueError):
        return None
    if coef.dtype != np.float32 or coef.shape != (meta.nz, int(meta.nb[0]), int(meta.nb[1]), 3):
        return None
    meta.coef = coef
    return meta


class _Basis:
    """The departure tables of one geometry, in units of its largest magnet edge.

    ``vectors`` are orthonormal departure patterns over the cells (rows), each with the
    table of its field; a departure ``v`` is read as ``sum_j (u_j . v) T_j`` when its part
    outside their span is below :data:`BASIS_TOL` of its norm, and otherwise that part
    becomes a new vector with its own table. The departures of one geometry for every
    recoil susceptibility lie close to a space of one or two dimensions (the Neumann
    series ``sum_k chi^k (X A)^k`` is dominated by its first terms, and the departures of
    large susceptibilities are near their span too), so one or two tables serve every
    grade of every catalogue size of one shape and pattern. Stored on disk by key
    (:func:`matdb.physics.recoil.disk_cache`)."""

    def __init__(self, key: str, sizes, centres, plate_z, top_z):
        self.key = key
        self.sizes, self.centres, self.plate_z, self.top_z = sizes, centres, plate_z, top_z
        self.vectors: list[np.ndarray] = []
        self.ids: list[str] = []
        self.tables: list = []
        self.lock = threading.Lock()
        got = disk_get(f"rbasis-{key}")
        n = 3 * sizes.shape[0]
        if isinstance(got, list) and all(isinstance(g, tuple) and len(g) == 2 for g in got):
            for vid, vec in got:
                if isinstance(vec, np.ndarray) and vec.shape == (n,):
                    self.ids.append(str(vid))
                    self.vectors.append(vec)
                    self.tables.append(None)

    def coefficients(self, v: np.ndarray, share: float = 1.0) -> np.ndarray:
        """``c`` with ``v ~ sum_j c_j u_j`` (a new vector and table when the part of ``v``
        outside the span, relative to ``v`` and times ``share`` (the departures' size over
        the polarisation's), exceeds :data:`BASIS_TOL`)."""
        with self.lock:
            U = np.array(self.vectors) if self.vectors else np.zeros((0, v.size))
            c = U @ v
            r = v - c @ U
            nv = float(np.linalg.norm(v))
            if nv == 0.0 or float(np.linalg.norm(r)) * share <= BASIS_TOL * nv:
                return c
            r -= (U @ r) @ U  # once more: orthogonal to rounding
            u = r / float(np.linalg.norm(r))
            vid = _hash(u)[:16]
            table = _Table(*_sources(self.sizes, self.centres, u.reshape(-1, 3), self.plate_z), self.top_z)
            _BUILT[0] += 1
            self.vectors.append(u)
            self.ids.append(vid)
            self.tables.append(table)
            _store(self.key, vid, table)
            disk_set(f"rbasis-{self.key}", list(zip(self.ids, self.vectors)))
            return np.append(c, float(u @ v))

    def grid(self) -> "_Table":
        """The first table: the grid every table of this geometry shares."""
        return self.table(0)

    def values(self) -> list[np.ndarray]:
        """Every table's values, (nodes, 3) float32 each."""
        return [self.table(i).values() for i in range(len(self.vectors))]

    def table(self, i: int) -> "_Table":
        with self.lock:
            t = self.tables[i]
            if t is None:
                t = _fetch(self.key, self.ids[i])
                if t is None:  # lost from the disk cache: recompute the same vector's table
                    t = _Table(*_sources(self.sizes, self.centres, self.vectors[i].reshape(-1, 3),
                                         self.plate_z), self.top_z)
                    _BUILT[0] += 1
                    _store(self.key, self.ids[i], t)
                self.tables[i] = t
            return t


class CorrectionField:
    """Field of the cells' departures ``dJ`` from their magnets' mean polarisation.

    Parameters
    ----------
    sizes, centres : ndarray (k, 3)
        Cells [m].
    dj : ndarray (k, 3)
        Departures of the cells' polarisation [T].
    plate_z : float or None
        Surface of an ideal steel back plate [m] (images), or None.
    top_z : float
        Highest top face of the magnets [m]; the table holds points above it.
    tabulate : bool
        False: always the exact cell field.
    owner : ndarray (k,), optional
        Magnet of each cell (default: all one magnet).
    label : tuple
        Fields of the same cells whose departures differ in kind (the magnets' pattern of
        polarisations) keep apart tables under different labels.
    ref : float, optional
        The magnets' largest polarisation [T]: the scale of the field for
        :data:`BASIS_TOL` (default: the departures' own).

    The tables are built on first use on the geometry in units of its largest magnet
    (:attr:`scale`; the field of a scaled geometry is the same function of the scaled
    position) and shared by every field of that geometry whose departures lie in the span
    of the tables' departures (:class:`_Basis`): every remanence and temperature, every
    recoil susceptibility, every catalogue size of one shape and pattern.
    """

    def __init__(self, sizes, centres, dj, plate_z, top_z, tabulate: bool = True, owner=None,
                 label=(), ref: float | None = None):
        self.sizes = np.asarray(sizes, dtype=float)
        self.centres = np.asarray(centres, dtype=float)
        self.dj = np.asarray(dj, dtype=float)
        self.owner = np.zeros(len(self.sizes), dtype=int) if owner is None else np.asarray(owner, dtype=int)
        self.plate_z = None if plate_z is None else float(plate_z)
        self.top_z = float(top_z)
        self.tabulate = bool(tabulate)
        self.label = tuple(label)
        self.ref = None if not ref else float(ref)
        self._exact = None
        self._sh = None
        self._cmat = None
        self._b = None
        self._norm = float(np.max(np.abs(self.dj))) if self.dj.size else 0.0
        if self.sizes.size:
            lo, hi = self.centres - self.sizes / 2, self.centres + self.sizes / 2
            self.scale = max(float(np.max(hi[self.owner == m].max(axis=0) - lo[self.owner == m].min(axis=0)))
                             for m in np.unique(self.owner))
        else:
            self.scale = 1.0

    def _basis(self) -> _Basis:
        L = self.scale
        geo = [np.round(a / L, 9) + 0.0 for a in (self.sizes, self.centres)]
        pz = None if self.plate_z is None else round(self.plate_z / L, 9) + 0.0
        tz = round(self.top_z / L, 9) + 0.0
        key = _hash(*geo, extra=(self.label, pz, tz, code_fingerprint(), CELL_NODES, Z_RATIO, MAX_GRID,
                                 MARGIN_L, MARGIN_FRAC, HEIGHT_L))[:32]
        with _LOCK:
            b = _BASES.get(key)
            if b is None:
                if len(_BASES) >= _BASES_MAX:
                    _BASES.pop(next(iter(_BASES)))
                b = _BASES[key] = _Basis(key, *geo, pz, tz)
        return b

    def _shared(self) -> "_Shared":
        if self._sh is None:
            key = _hash(self.sizes, self.centres, np.round(self.dj / self._norm, 12) + 0.0,
                        extra=(self.plate_z, self.top_z))
            with _LOCK:
                sh = _SHARED.get(key)
                if sh is None:
                    if len(_SHARED) >= _SHARED_MAX:
                        _SHARED.pop(next(iter(_SHARED)))
                    sh = _SHARED[key] = _Shared(self.sizes, self.centres, self.dj / self._norm,
                                                self.plate_z, self.top_z, self.owner)
            self._sh = sh
        return self._sh

    def coefficients(self) -> np.ndarray:
        """``C`` (3 K, 3): the departure field is ``gather(q) @ C`` (:meth:`_Basis.values`)."""
        if self._cmat is None:
            b = self._basis()
            c = b.coefficients(self.dj.ravel() / self._norm,
                               1.0 if self.ref is None else self._norm / self.ref)
            self._cmat = np.kron(c[:, None], np.eye(3)) * self._norm
            self._b = b
        return self._cmat

    def table(self) -> _Table:
        """The grid shared by the tables of this geometry (in units of :attr:`scale`; built
        on first use)."""
        self.coefficients()
        return self._b.grid()

    def _tabulated(self, p: np.ndarray, inside: np.ndarray, out: np.ndarray, cmats) -> None:
        """Fill ``out[j][inside]`` with the tabulated fields of ``cmats[j]``."""
        q = p[inside] / self.scale
        k = max(c.shape[0] for c in cmats) // 3  # the basis may have grown since
        g = self._b.grid().gather(q, self._b.values()[:k])
        for o, c in zip(out, cmats):
            o[inside] = g[:, :c.shape[0]] @ c

    def exact_set(self) -> MagnetSet:
        """The cells (and images) as cuboid sources."""
        if self._exact is None:
            s, c, d = _sources(self.sizes, self.centres, self.dj, self.plate_z)
            self._exact = MagnetSet(["cuboid"] * s.shape[0], s, d, c)
        return self._exact

    def far_set(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """The cells (and images) as point dipoles of their moments, with the box beyond
        which they stand for the cells: (moments [A m^2], positions [m], lo, hi [m])."""
        mom, pos, lo, hi = self._shared().far()
        return mom * self._norm, pos, lo, hi

    def B(self, p: np.ndarray) -> np.ndarray:
        """Departure field at ``p`` (n, 3) [m], shape (n, 3) [T]: tabulated above the top
        face over the magnets, exact elsewhere."""
        if self._norm == 0.0 or p.shape[0] == 0:
            return np.zeros_like(p)
        if not self.tabulate:
            return self.exact_set().B(p)
        cmat = self.coefficients()
        inside = self.table().covers(p / self.scale)
        out = np.empty_like(p)
        self._tabulated(p, inside, [out], [cmat])
        rest = ~inside
        if rest.any():
            out[rest] = self._shared().outside(p[rest]) * self._norm
        return out


def family_field(fields):
    """One function for the departure fields of several :class:`CorrectionField` s of one
    geometry (each tabulated): ``field(p (n, 3) [m]) -> (k, n, 3) [T]``, the tables read
    once for all of them; None when they do not share their tables."""
    fs = list(fields)
    if not fs or any((not f.tabulate) or f._norm == 0.0 for f in fs):
        return None
    # the largest departures first (the strongest recoil): the smaller ones then mostly lie
    # in the span of the first and one more, so fewer tables are built
    for i in np.argsort([-f._norm for f in fs], kind="stable"):
        fs[i].coefficients()
    cm = [f.coefficients() for f in fs]
    b = fs[0]._b
    if any(f._b is not b or f.scale != fs[0].scale for f in fs):
        return None
    first = fs[0]

    def field(p: np.ndarray) -> np.ndarray:
        out = np.empty((len(fs),) + p.shape)
        inside = first.table().covers(p / first.scale)
        first._tabulated(p, inside, out, cm)
        rest = ~inside
        if rest.any():
            for o, f in zip(out, fs):
                o[rest] = f._shared().outside(p[rest]) * f._norm
        return out

    return field


class _Shared:
    """What every field of proportional departures shares, at unit scale: the cells as
    sources and as point dipoles."""

    def __init__(self, sizes, centres, dj, plate_z, top_z, owner):
        self.sizes, self.centres, self.dj = sizes, centres, dj
        self.plate_z, self.top_z, self.owner = plate_z, top_z, owner
        self._exact = self._far = None

    def exact(self) -> MagnetSet:
        if self._exact is None:
            s, c, d = _sources(self.sizes, self.centres, self.dj, self.plate_z)
            self._exact = MagnetSet(["cuboid"] * s.shape[0], s, d, c)
        return self._exact

    def far(self):
        if self._far is None:
            lo_c = self.centres - self.sizes / 2
            hi_c = self.centres + self.sizes / 2
            ext = max(float(np.max(hi_c[self.owner == m].max(axis=0) - lo_c[self.owner == m].min(axis=0)))
                      for m in np.unique(self.owner))
            s, c, d = _sources(self.sizes, self.centres, self.dj, self.plate_z)
            mom = d * (np.prod(s, axis=1) / MU0)[:, None]
            reach = FAR_FACTOR * ext
            self._far = (mom, c, lo_c.min(axis=0) - reach, hi_c.max(axis=0) + reach)
        return self._far

    def outside(self, p: np.ndarray) -> np.ndarray:
        """Exact cells near the magnets, point dipoles far from them."""
        mom, pos, lo, hi = self.far()
        away = np.any((p < lo) | (p > hi), axis=1)
        if self.plate_z is not None:  # images lie below the plate as well
            away &= p[:, 2] >= self.plate_z
        out = np.empty_like(p)
        if away.any():
            out[away] = dipole_B(p[away], mom, pos)
        if not away.all():
            out[~away] = self.exact().B(p[~away])
        return out
