"""Reference dilute-gas viscosities and molar masses for the gas table checks.

Sources (general-purpose reference libraries from PyPI, pinned in
requirements.txt beside this file):
  * CoolProp 8.0.0: dilute-gas viscosity (evaluated at 1 Pa) for the gases it
    has a viscosity model for: N2, air, O2, Ar, He, H2, H2O, CO2, CH4.
  * thermo 0.6.1, method VDI_PPDS: dilute-gas viscosity for Ne, Kr, Xe, CO,
    which CoolProp 8.0.0 has no viscosity model for.
  * chemicals 1.5.2: molar masses (IUPAC standard atomic weights); air from
    CoolProp's pseudo-pure fluid.
"""

import math

import CoolProp.CoolProp as CP

# rarefy gas id -> (CoolProp fluid or None, CAS for thermo/chemicals)
GASES = {
    "N2": ("Nitrogen", "7727-37-9"),
    "air": ("Air", None),
    "O2": ("Oxygen", "7782-44-7"),
    "Ar": ("Argon", "7440-37-1"),
    "He": ("Helium", "7440-59-7"),
    "H2": ("Hydrogen", "1333-74-0"),
    "H2O": ("Water", "7732-18-5"),
    "CO2": ("CarbonDioxide", "124-38-9"),
    "CO": (None, "630-08-0"),
    "Ne": (None, "7440-01-9"),
    "Kr": (None, "7439-90-9"),
    "Xe": (None, "7440-63-3"),
    "CH4": ("Methane", "74-82-8"),
}

_thermo_cache = {}


def molar_mass(gas):
    """Molar mass in g/mol."""
    fluid, cas = GASES[gas]
    if cas is None:
        return CP.PropsSI("M", fluid) * 1e3
    from chemicals import MW

    return MW(cas)


def viscosity(gas, t):
    """Dilute-gas viscosity in Pa·s at temperature t (K), and its source."""
    fluid, cas = GASES[gas]
    if fluid is not None:
        if fluid == "Water":
            # CoolProp's water model starts at the triple point, 273.16 K.
            t = max(t, 273.1601)
        return CP.PropsSI("V", "T", t, "P", 1.0, fluid), "CoolProp 8.0.0"
    from thermo import ViscosityGas

    if cas not in _thermo_cache:
        v = ViscosityGas(CASRN=cas)
        v.method = "VDI_PPDS"
        _thermo_cache[cas] = v
    return _thermo_cache[cas].T_dependent_property(t), "thermo 0.6.1 VDI_PPDS"


def mean_free_path_ce(gas, t, p, k_b, m_u):
    """First Chapman-Enskog hard-sphere mean free path from viscosity:
    lambda = (16/5) (eta/p) sqrt(k T / (2 pi m))."""
    eta, _ = viscosity(gas, t)
    m = molar_mass(gas) * m_u
    return 16.0 / 5.0 * eta / p * math.sqrt(k_b * t / (2.0 * math.pi * m))
