"""Physical constants, CODATA 2018 through :mod:`scipy.constants`; nothing here is retyped.

Every physics and material module takes its constants from here, so one
value of q, k and epsilon_0 is used throughout.
"""

from __future__ import annotations

import numpy as np
from scipy import constants as _c

Q = _c.e  #: elementary charge [C]
K_B = _c.k  #: Boltzmann constant [J/K]
EPS0 = _c.epsilon_0  #: vacuum permittivity [F/m]
ZERO_CELSIUS = _c.zero_Celsius  #: 0 degC in kelvin [K]


def thermal_voltage(temperature):
    """Thermal voltage kT/q.

    Parameters
    ----------
    temperature : array_like
        Absolute temperature [K].

    Returns
    -------
    numpy.ndarray
        kT/q [V]; 0.025852 V at 300 K.
    """
    return K_B * np.asarray(temperature, dtype=float) / Q
