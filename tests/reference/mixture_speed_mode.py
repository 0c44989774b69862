"""Reference values for the most probable speed of a gas mixture, used by
crates/core/src/engine/tests.rs (mixture_most_probable_speed_is_the_mode).

The speed distribution of a mixture is the number-weighted sum of the
species' Maxwell-Boltzmann distributions; its mode is found here on a dense
grid and polished with scipy.optimize.minimize_scalar (bounded).

    python tests/reference/mixture_speed_mode.py
"""

import numpy as np
import scipy
from scipy import constants
from scipy.optimize import minimize_scalar

K_B = constants.k
M_U = constants.physical_constants["atomic mass constant"][0]
# Molar masses as in the gas table (chemicals 1.5.2).
M = {"H2": 2.01588, "He": 4.002602, "N2": 28.0134, "O2": 31.9988, "Ar": 39.948, "Xe": 131.293}


def density(v, mix, t):
    total = 0.0
    for gas, x in mix:
        a = M[gas] * M_U / (2 * K_B * t)
        total += x * 4 * np.pi * (a / np.pi) ** 1.5 * v * v * np.exp(-a * v * v)
    return total


def mode(mix, t):
    grid = np.linspace(1.0, 3000.0, 300001)
    k = int(np.argmax(density(grid, mix, t)))
    r = minimize_scalar(lambda v: -density(v, mix, t), bounds=(grid[k - 1], grid[k + 1]),
                        method="bounded", options={"xatol": 1e-10})
    return r.x


print(f"scipy {scipy.__version__}")
for mix, t in [
    ([("N2", 0.78), ("O2", 0.21), ("Ar", 0.01)], 295.15),
    ([("He", 0.5), ("Ar", 0.5)], 300.0),
    ([("H2", 0.9), ("Ar", 0.1)], 300.0),
    ([("H2", 0.5), ("Xe", 0.5)], 300.0),
]:
    print(",".join(f"{g}={x}" for g, x in mix), t, f"{mode(mix, t):.9g}")
