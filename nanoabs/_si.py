"""Physical constants used by nanoabs, with the attribute names of ``scipy.constants``.

The seven defining constants of the SI are exact since 2019 (BIPM, *The
International System of Units*, 9th ed. (2019), Table 1); hbar follows from h,
and the Stefan-Boltzmann constant is the CODATA 2018 value (Tiesinga et al.,
Rev. Mod. Phys. 93, 025010 (2021)), exact as a function of h, c and k and
quoted to the digits scipy.constants gives.  Kept here instead of importing
``scipy.constants`` (about 0.3 s) when nanoabs is imported;
tests/test_import_time.py checks every value against scipy.constants.
"""

import math

h = 6.62607015e-34  # Planck constant [J s] (exact)
c = 299792458.0  # speed of light in vacuum [m/s] (exact)
e = 1.602176634e-19  # elementary charge [C] (exact)
k = 1.380649e-23  # Boltzmann constant [J/K] (exact)
hbar = h / (2 * math.pi)  # reduced Planck constant [J s]
Stefan_Boltzmann = 5.670374419e-8  # [W m^-2 K^-4] (CODATA 2018)
