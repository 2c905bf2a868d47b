"""The compiled cycle timing (``rcc._cycle_kernel``) against the library's formulas.

The kernel evaluates, point by point, formulas that also exist vectorized in
the library; where it carries its own copy of one, the copy is checked here
against the library function (which is itself checked against its published
source in ``tests/test_reference_formulas.py``).
"""

import numpy as np
import pytest

from rcc import _cycle_kernel as kernel
from rcc import devices


def test_storage_time_is_the_library_charge_control_formula():
    """``storage_time_rising`` is :func:`rcc.devices.storage_time_rising_current`
    (charge control, Moll 1954; Sparkes 1960) for one point."""
    rng = np.random.default_rng(7)
    for _ in range(300):
        tau = 10 ** rng.uniform(-7.5, -5.5)
        base = 10 ** rng.uniform(-4, -0.5)
        collector = 10 ** rng.uniform(-3, 0.5)
        slope = 10 ** rng.uniform(3, 6)
        gain = rng.uniform(5, 80)
        expected = float(devices.storage_time_rising_current(tau, base, base, collector,
                                                             slope, gain))
        got = kernel.storage_time_rising(tau, base, base, collector, slope, gain)
        # same Newton steps in the same order: equal to rounding (measured: at most
        # 6.7e-16 relative over these 300 draws, numba's exp against numpy's)
        assert got == pytest.approx(expected, rel=1e-12, abs=1e-18)


def test_tables_of_names_match_the_indices():
    """The column tables and the index constants the kernel reads agree."""
    for prefix, names in (("P_", kernel.POINT_NAMES), ("C_", kernel.CONSTANT_NAMES)):
        for index, name in enumerate(names):
            assert getattr(kernel, prefix + name.upper()) == index
