"""Tests of matdb.constants: the one definition of mu_0, g, the Celsius offset, the 20 C
reference and the plausibility limits.

Outside references: CODATA 2018 (Tiesinga et al., Rev. Mod. Phys. 93, 025010, 2021) and
scipy.constants; the SI Brochure, 9th ed. (2019), for the Celsius scale and standard
gravity (3rd CGPM, 1901); pint's offset units; IEC 60404-8-1 (catalogue data at 20 C);
periodictable and the CRC Handbook for densities.
"""

from __future__ import annotations

import io
import subprocess
import sys
import tokenize
from pathlib import Path

import numpy as np
import periodictable
import pint
import pytest
import scipy.constants as sc

from matdb import constants as C

PACKAGE = Path(C.__file__).parent


def test_mu0_is_scipy_and_codata_2018():
    # scipy.constants.mu_0 is the one source; CODATA 2018 gives 1.25663706212(19)e-6 N/A^2,
    # the 2022 adjustment moved it by 7e-10 relative, so 1e-9 holds against either.
    assert C.MU0 == sc.mu_0
    assert C.MU0 == pytest.approx(1.25663706212e-6, rel=1e-9)
    # and within 1e-9 of the pre-2019 exact value 4 pi 1e-7 (SI Brochure 2019, 2.3.1 note)
    assert C.MU0 == pytest.approx(4 * np.pi * 1e-7, rel=1e-9)


def test_standard_gravity_is_the_cgpm_value():
    # 3rd CGPM (1901): g_n = 9.80665 m/s^2 exactly; scipy.constants.g is the same number
    assert C.G_STANDARD == sc.g == 9.80665


def test_celsius_offset_and_reference_temperature():
    # SI Brochure 2019, 2.3.1: t/degC = T/K - 273.15; scipy.constants.zero_Celsius
    assert C.ZERO_CELSIUS_K == sc.zero_Celsius
    # IEC 60404-8-1 quotes magnet properties at 20 C
    assert C.T_REF_C == 20.0
    assert C.T_REF_K == pytest.approx(293.15, abs=1e-12)


def test_conversions_agree_with_pint_and_scipy():
    ureg = pint.UnitRegistry()  # an outside registry, not matdb's
    for t_c in (-40.0, 0.0, 20.0, 100.0, 1000.0):
        t_k = ureg.Quantity(t_c, "degC").to("K").magnitude
        assert C.celsius_to_kelvin(t_c) == pytest.approx(t_k, abs=1e-12)
        assert C.kelvin_to_celsius(t_k) == pytest.approx(t_c, abs=1e-12)
    # arrays pass through (scipy.constants.convert_temperature as the reference)
    t = np.array([233.15, 293.15, 373.15])
    np.testing.assert_allclose(C.kelvin_to_celsius(t), sc.convert_temperature(t, "Kelvin", "Celsius"), atol=1e-12)
    np.testing.assert_allclose(C.celsius_to_kelvin(C.kelvin_to_celsius(t)), t, atol=1e-12)


def test_density_limits_hold_every_real_solid_and_air():
    lo, hi = C.DENSITY_RANGE_KG_M3
    # densest element: osmium (periodictable, g/cm^3 -> kg/m^3); lightest solid element: lithium
    assert lo < periodictable.Li.density * 1000 < periodictable.Os.density * 1000 < hi
    # air at 20 C and 1 atm, 1.204 kg/m^3 (CRC Handbook; common practice, no source)
    assert lo < 1.204 < hi
    # a polymer's density typed in g/cm^3 with the kg/m^3 unit is refused (the slip the bound catches)
    assert not (lo <= 0.95 <= hi)


def test_other_limits_bracket_catalogue_ranges():
    # MMPA 0100-00: bonded ferrite ~0.2 T to sintered NdFeB ~1.5 T; Hcj of SmCo <= ~2,400 kA/m
    assert C.BR_RANGE_T[0] < 0.2 and 1.5 < C.BR_RANGE_T[1]
    assert C.HCJ_MAX_KA_M > 2400
    # CRC Handbook: bismuth chi_v = -1.66e-4 (SI) must pass, iron (~1e3) must not
    assert 1.66e-4 < C.CHI_MAX_ABS < 1e3
    # NdFeB beta(Hcj) -0.76 %/K is the largest catalogue coefficient in seed_data/CHECKS.md
    assert 0.76 < C.ALPHA_MAX_PCT_PER_K


def test_importing_constants_does_not_import_scipy():
    # regression check: the unit parser imports constants on the CLI start-up path
    code = "import sys, matdb.constants as c; print('scipy' in sys.modules); c.MU0; print('scipy' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.split()
    assert out == ["False", "True"]


def _numbers(path: Path) -> list[tuple[int, str, str]]:
    """(line, number token, next significant token) for every numeric literal in ``path``."""
    toks = [t for t in tokenize.generate_tokens(io.StringIO(path.read_text()).readline)
            if t.type not in (tokenize.NL, tokenize.NEWLINE, tokenize.COMMENT, tokenize.INDENT, tokenize.DEDENT)]
    out = []
    for i, t in enumerate(toks):
        if t.type == tokenize.NUMBER:
            nxt = " ".join(x.string for x in toks[i + 1:i + 4])
            prev = " ".join(x.string for x in toks[max(i - 3, 0):i])
            out.append((t.start[0], t.string, prev + " # " + nxt))
    return out


def test_no_hand_typed_constants_outside_constants_module():
    # regression check: 273.15 / 293.15, 9.80665 and 4e-7 * pi (or 1.2566...e-6) are typed
    # only in matdb/constants.py; strings and docstrings do not count
    bad = []
    for path in sorted(PACKAGE.rglob("*.py")):
        if path.name == "constants.py" and path.parent == PACKAGE:
            continue
        for line, num, ctx in _numbers(path):
            try:
                v = float(num)
            except ValueError:
                continue
            near_pi = "pi" in ctx
            if v in (273.15, 293.15, 9.80665) or (v in (4e-7, 1e-7) and near_pi) or 1.2566e-6 < v < 1.2567e-6:
                bad.append(f"{path.relative_to(PACKAGE.parent)}:{line}: {num}")
    assert bad == []
