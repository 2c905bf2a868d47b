"""rcc: analyzer for self-oscillating (ringing-choke) flyback power supplies.

The library API, usable from a notebook::

    import rcc
    design = rcc.load_design("worked_cases/standby_12v_universal.toml")

Every value is in SI units (temperatures in kelvin); results are frozen
dataclasses whose fields document their units.
"""

from rcc.design import Design, DesignError, Load, design_from_dict, load_design

__all__ = ["Design", "DesignError", "Load", "design_from_dict", "load_design"]
__version__ = "0.1.0"
