"""Physical constants used by nanoabs, with the attribute names of ``scipy.constants``.

h, c, e and k are defining constants of the SI, exact since 2019 (BIPM, *The
International System of Units*, 9th ed. (2019), Table 1); hbar and the
Stefan-Boltzmann constant 2 pi^5 k^4 / (15 h^3 c^2) follow from them exactly.
m_e and epsilon_0 are measured: CODATA 2022 values (Mohr et al., Rev. Mod.
Phys. 97, 025002 (2025)), as in scipy.constants.  Kept here instead of
importing ``scipy.constants`` (about 0.3 s) when nanoabs is imported;
tests/test_import_time.py checks every value against scipy.constants.
"""

import math

h = 6.62607015e-34  # Planck constant [J s] (exact)
c = 299792458.0  # speed of light in vacuum [m/s] (exact)
e = 1.602176634e-19  # elementary charge [C] (exact)
k = 1.380649e-23  # Boltzmann constant [J/K] (exact)
hbar = h / (2 * math.pi)  # reduced Planck constant [J s]
Stefan_Boltzmann = 2 * math.pi**5 * k**4 / (15 * h**3 * c**2)  # [W m^-2 K^-4]
m_e = 9.1093837139e-31  # electron mass [kg] (CODATA 2022)
epsilon_0 = 8.8541878188e-12  # vacuum permittivity [F/m] (CODATA 2022)
