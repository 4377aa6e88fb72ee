"""Physical constants as plain cgs floats for the compiled kernels.

The kernels must not import astropy (it is slow to import and numba cannot
use Quantities), so the values are written here once, converted from
``astropy.constants`` (CODATA 2022 and the IAU 2015 nominal solar values, as
shipped with astropy 8).  ``tests/test_constants.py`` checks every value
against the installed astropy, so a drift between the two is a test failure,
not a silent change of physics.
"""

G = 6.674299999999999e-08  # Gravitational constant [cm3 / (g s2)], CODATA 2022
C_LIGHT = 29979245800.0  # Speed of light in vacuum [cm / s], CODATA 2022
SIGMA_T = 6.6524587051e-25  # Thomson scattering cross-section [cm2], CODATA 2022
M_U = 1.66053906892e-24  # Atomic mass [g], CODATA 2022
K_B = 1.380649e-16  # Boltzmann constant [erg / K], CODATA 2022
SIGMA_SB = 5.6703744191844314e-05  # Stefan-Boltzmann constant [g / (s3 K4)], CODATA 2022
M_SUN = 1.988409870698051e+33  # Solar mass [g], IAU 2015 Resolution B 3 + CODATA 2022
L_SUN = 3.828e+33  # Nominal solar luminosity [erg / s], IAU 2015 Resolution B 3
R_SUN = 69570000000.0  # Nominal solar radius [cm], IAU 2015 Resolution B 3

A_RAD = 4.0 * SIGMA_SB / C_LIGHT  # radiation constant a = 4 sigma / c [erg cm-3 K-4]
YEAR = 31557600.0  # Julian year [s], the year of "Msun/yr" (IAU)

# Standard atomic weights (IUPAC 2021 abridged values, Prohaska et al. 2022,
# Pure Appl. Chem. 94, 573; from memory): the mass of a hydrogen and of a
# helium atom of natural isotopic composition, in units of m_u.  Electrons
# and particles per gram are counted with them (windsolve.core.basics).
A_H = 1.008
A_HE = 4.002602
