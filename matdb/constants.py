"""Physical constants and shared reference values: the one definition of each in matdb.

Every module that needs mu_0, standard gravity, the Celsius offset, the 20 C reference
temperature of catalogue data or a plausibility limit for a stored or typed property
imports it from here; nothing else in the package types these numbers.

Constants
---------
:data:`MU0`
    Vacuum permeability [T m / A], ``scipy.constants.mu_0``: the CODATA adjustment scipy
    ships (2022 in scipy 1.15 and later, 1.25663706127e-6; 2018 [1]_: 1.25663706212e-6).
    Measured since the 2019 SI, no longer exactly 4 pi 1e-7 (off by about 1e-9 relative).
:data:`G_STANDARD`
    Standard acceleration of gravity [m/s^2], ``scipy.constants.g`` (9.80665 exactly,
    3rd CGPM 1901 [2]_).
:data:`ZERO_CELSIUS_K`
    0 degC in kelvin, 273.15 by the definition of the Celsius scale [2]_.
:data:`T_REF_K`
    20 C [K]: the temperature at which magnet catalogues quote Br, Hcj and their
    temperature coefficients (IEC 60404-8-1 [3]_), and the default temperature of a
    design that names none.

MU0 and G_STANDARD are loaded on first use (PEP 562 module ``__getattr__``): importing
``scipy.constants`` imports numpy and part of scipy (about 0.2 s on a quiet machine), and
the unit parser and the input limits import this module for the temperatures and
limits only, on the CLI's start-up path.

References
----------
.. [1] E. Tiesinga, P. J. Mohr, D. B. Newell and B. N. Taylor, "CODATA recommended
   values of the fundamental physical constants: 2018", Rev. Mod. Phys. 93, 025010
   (2021). https://doi.org/10.1103/RevModPhys.93.025010
.. [2] BIPM, "The International System of Units (SI)", 9th ed., 2019, section 2.3.1
   (degree Celsius) and appendix 1 (3rd CGPM, 1901: standard gravity).
.. [3] IEC 60404-8-1:2015, "Magnetic materials - Part 8-1: Specifications for individual
   materials - Magnetically hard materials" (properties quoted at 20 C).
"""

from __future__ import annotations

ZERO_CELSIUS_K = 273.15  # [K], definition of the Celsius scale (SI Brochure 2019, 2.3.1)
T_REF_C = 20.0  # reference temperature of catalogue magnet data [degC]
T_REF_K = T_REF_C + ZERO_CELSIUS_K  # the same in kelvin (293.15) [K]


def kelvin_to_celsius(t_k):
    """Celsius temperature [degC] of an absolute temperature ``t_k`` [K] (float or array)."""
    return t_k - ZERO_CELSIUS_K


def celsius_to_kelvin(t_c):
    """Absolute temperature [K] of a Celsius temperature ``t_c`` [degC] (float or array)."""
    return t_c + ZERO_CELSIUS_K


# Plausibility limits: one set, shared by the seed loader (seed_data/*.csv) and lab values
# (what people record or import). A value outside is refused as a slip of unit or sign,
# not as a physical impossibility in every case; the reason for each bound is beside it.

# |chi_v| above 1e-2 is not a dia- or paramagnet (the strongest paramagnetic salts reach
# ~1e-3; ferromagnets are >> 1) (common practice, no source).
CHI_MAX_ABS = 1e-2
# Density [kg/m^3]. Lower bound 1 kg/m^3: air at 20 C (1.204, the lightest medium the data
# holds) stays inside, and "0.95 kg/m^3" typed for 0.95 g/cm^3 (a polymer lighter than water,
# the likeliest unit slip) is caught. The seed loader used 0.01 kg/m^3, which would admit
# only hydrogen, helium and record aerogels, none of them a plate, floater or medium matdb
# models. Upper bound: osmium, the densest element, 22,590 kg/m^3 (CRC Handbook; common
# practice, no source).
DENSITY_RANGE_KG_M3 = (1.0, 25000.0)
# Remanence [T]: bonded ferrite ~0.1 T to the best sintered NdFeB ~1.5 T (MMPA 0100-00 ranges).
BR_RANGE_T = (0.05, 1.7)
# Intrinsic coercivity [kA/m]: the hardest SmCo and Dy-rich NdFeB stay below ~3,200 kA/m.
HCJ_MAX_KA_M = 5000.0
# Reversible temperature coefficient of Br or Hcj [%/K]: catalogue grades lie within about
# -0.8..+0.4 %/K (MMPA 0100-00 tables; common practice, no source).
ALPHA_MAX_PCT_PER_K = 1.0

MU0: float  # vacuum permeability [T m / A], loaded from scipy.constants.mu_0 on first use
G_STANDARD: float  # standard gravity [m/s^2], loaded from scipy.constants.g on first use
_FROM_SCIPY = {"MU0": "mu_0", "G_STANDARD": "g"}


def __getattr__(name: str):
    # Lazy on purpose: keeps scipy (and numpy) off the CLI start-up path, see the module docstring.
    if name in _FROM_SCIPY:
        from scipy import constants

        value = float(getattr(constants, _FROM_SCIPY[name]))
        globals()[name] = value
        return value
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


__all__ = ["MU0", "G_STANDARD", "ZERO_CELSIUS_K", "T_REF_C", "T_REF_K", "kelvin_to_celsius",
           "celsius_to_kelvin", "CHI_MAX_ABS", "DENSITY_RANGE_KG_M3", "BR_RANGE_T", "HCJ_MAX_KA_M",
           "ALPHA_MAX_PCT_PER_K"]
