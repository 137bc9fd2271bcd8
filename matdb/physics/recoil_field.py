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
(``scipy.fft``) and keeps the values over the region a plate can occupy, as cubic
B-spline coefficients (``scipy.ndimage.spline_filter``); a point is then three cubic
interpolations (``scipy.ndimage.map_coordinates``). Points outside that region (inside or
beside the magnets, far away, high above) are evaluated exactly from the cells.

The table is band-limited at the grid's Nyquist wavenumber (a cosine taper over its upper
half): within about ``3 h`` of the top face (``h`` the grid spacing, :data:`SPACING_M`)
it is the field of the departures smoothed over ``h``. There the exact cell field carries
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
import threading

import numpy as np
from scipy import fft as sfft
from scipy import ndimage

from matdb.constants import MU0
from matdb.physics.fields import MagnetSet, dipole_B

__all__ = ["CorrectionField", "SPACING_M", "clear_tables"]

#: Largest horizontal grid spacing of a table [m]; smaller for small cells (an eighth of
#: the smallest cell's width) and larger when the grid would exceed :data:`MAX_GRID`.
SPACING_M = 2.5e-4
#: Order of the spline interpolation between the tabulated values (1: trilinear).
ORDER = 1
#: Height levels transformed together.
LEVEL_CHUNK = 8
#: Largest FFT grid per axis.
MAX_GRID = 768
#: Relative spacing of the height levels (geometric above the first, ``h``).
Z_RATIO = 0.12
#: Horizontal margin of the table around the magnets [m] (and at least this fraction of
#: the magnets' extent).
MARGIN_M = 5e-3
MARGIN_FRAC = 0.35
#: Height of the table above the top face [m] (and at least twice the magnets' extent).
HEIGHT_M = 5e-2
#: Beyond this many times the largest magnet's extent from the magnets, the cells are
#: point dipoles (:meth:`CorrectionField.far_set`).
FAR_FACTOR = 1.0
_TABLES: dict = {}
_LOCK = threading.Lock()
_TABLES_MAX = 8


def clear_tables() -> None:
    """Forget every cached table."""
    with _LOCK:
        _TABLES.clear()


def _sources(sizes, centres, dj, plate_z):
    """Cells plus their images in an ideal steel plate at ``plate_z`` (J' = (-Jx, -Jy, Jz))."""
    if plate_z is None:
        return sizes, centres, dj
    img_c = centres.copy()
    img_c[:, 2] = 2.0 * plate_z - img_c[:, 2]
    img_j = dj * np.array([-1.0, -1.0, 1.0])
    return (np.concatenate([sizes, sizes]), np.concatenate([centres, img_c]),
            np.concatenate([dj, img_j]))


class _Table:
    """Cubic B-spline coefficients of the departure field on (x, y, level) (SI)."""

    def __init__(self, sizes, centres, dj, top_z):
        lo = (centres - sizes / 2).min(axis=0)
        hi = (centres + sizes / 2).max(axis=0)
        extent = float(max(hi[0] - lo[0], hi[1] - lo[1]))
        margin = max(MARGIN_M, MARGIN_FRAC * extent)
        h = min(SPACING_M, float(np.min(sizes[:, :2])) / 8.0)
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
        z_span = max(HEIGHT_M, 2 * extent)
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
        # (component, level, x, y): points of one horizontal plane (a plate's quadrature)
        # then read two neighbouring levels, which stay in cache
        coef = np.empty((3, nz, self.nb[0], self.nb[1]), dtype=np.float32)
        for j0 in range(0, nz, LEVEL_CHUNK):  # a few levels at a time: bounded memory
            zl = levels[j0:j0 + LEVEL_CHUNK]
            lev = spec[None] * np.exp(-kabs[None] * zl[:, None, None])[..., None]
            # inverse along x, keep the table's rows, then along y (half spectrum)
            lev = sfft.ifft(lev, axis=1, workers=-1)[:, :self.nb[0]]
            vals = sfft.irfft(lev, n=n, axis=2, workers=-1)[:, :, :self.nb[1]]
            coef[:, j0:j0 + zl.size] = np.moveaxis(vals, 3, 0)
        self.order = ORDER
        if ORDER > 1:
            for c in range(3):
                coef[c] = ndimage.spline_filter(coef[c], order=ORDER, mode="nearest")
        self.coef = coef

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

    def __call__(self, p: np.ndarray) -> np.ndarray:
        coords = np.empty((3, p.shape[0]))
        coords[0] = np.log1p((p[:, 2] - self.top) / self.z0) / Z_RATIO
        coords[1] = (p[:, 0] - self.origin[0]) / self.h
        coords[2] = (p[:, 1] - self.origin[1]) / self.h
        out = np.empty((p.shape[0], 3))  # float32 table, float64 result
        for c in range(3):
            out[:, c] = ndimage.map_coordinates(self.coef[c], coords, order=self.order, mode="nearest",
                                                prefilter=False)
        return out


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

    The table is built on first use and shared (by content, up to a common factor) by
    every field whose departures are proportional: one table serves every remanence and
    temperature of a geometry.
    """

    def __init__(self, sizes, centres, dj, plate_z, top_z, tabulate: bool = True, owner=None):
        self.sizes = np.asarray(sizes, dtype=float)
        self.centres = np.asarray(centres, dtype=float)
        self.dj = np.asarray(dj, dtype=float)
        self.owner = np.zeros(len(self.sizes), dtype=int) if owner is None else np.asarray(owner, dtype=int)
        self.plate_z = None if plate_z is None else float(plate_z)
        self.top_z = float(top_z)
        self.tabulate = bool(tabulate)
        self._exact = None
        self._norm = float(np.max(np.abs(self.dj))) if self.dj.size else 0.0

    def _key(self) -> str:
        hsh = hashlib.sha1()
        for a in (self.sizes, self.centres, np.round(self.dj / self._norm, 12) + 0.0):
            hsh.update(np.ascontiguousarray(a).tobytes())
        hsh.update(repr((self.plate_z, self.top_z)).encode())
        return hsh.hexdigest()

    def _shared(self) -> "_Shared":
        key = self._key()
        with _LOCK:
            sh = _TABLES.get(key)
            if sh is None:
                if len(_TABLES) >= _TABLES_MAX:
                    _TABLES.pop(next(iter(_TABLES)))
                sh = _TABLES[key] = _Shared(self.sizes, self.centres, self.dj / self._norm,
                                            self.plate_z, self.top_z, self.owner)
        return sh

    def table(self) -> _Table:
        """The shared table of these departures at unit scale (built on first use)."""
        return self._shared().table()

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
        sh = self._shared()
        t = sh.table()
        inside = t.covers(p)
        if inside.all():
            return t(p) * self._norm
        out = np.empty_like(p)
        out[inside] = t(p[inside]) * self._norm
        rest = ~inside
        if rest.any():
            out[rest] = sh.outside(p[rest]) * self._norm
        return out


class _Shared:
    """What every field of proportional departures shares, at unit scale: the table, the
    cells as sources, the cells as point dipoles."""

    def __init__(self, sizes, centres, dj, plate_z, top_z, owner):
        self.sizes, self.centres, self.dj = sizes, centres, dj
        self.plate_z, self.top_z, self.owner = plate_z, top_z, owner
        self._table = self._exact = self._far = None
        self._lock = threading.Lock()

    def table(self) -> _Table:
        with self._lock:
            if self._table is None:
                s, c, d = _sources(self.sizes, self.centres, self.dj, self.plate_z)
                self._table = _Table(s, c, d, self.top_z)
        return self._table

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
