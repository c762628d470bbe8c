"""Earth and air constants used by the core, each with its source.

All values are SI. Where a reference library is used in the tests (MetPy), its
constants agree with these to the digits shown, so comparisons do not hide a
constant mismatch behind a tolerance.
"""

#: Mean Earth radius R1 of the Geodetic Reference System 1980, m.
#: Moritz (2000), "Geodetic Reference System 1980", J. Geodesy 74, 128-133.
EARTH_RADIUS = 6371008.7714

#: Angular velocity of the Earth's rotation, rad s-1 (Moritz 2000, GRS80).
OMEGA = 7.292115e-5

#: Standard acceleration of gravity, m s-2 (3rd CGPM, 1901; also WMO-No. 8).
G0 = 9.80665

#: Molar gas constant, J mol-1 K-1 (CODATA 2018, Tiesinga et al. 2021,
#: Rev. Mod. Phys. 93, 025010).
MOLAR_GAS_CONSTANT = 8.314462618

#: Molar mass of dry air, kg mol-1 (Picard et al. 2008, "Revised formula for
#: the density of moist air (CIPM-2007)", Metrologia 45, 149-155).
MOLAR_MASS_DRY_AIR = 28.96546e-3

#: Molar mass of water, kg mol-1 (Picard et al. 2008).
MOLAR_MASS_WATER = 18.015268e-3

#: Specific gas constant of dry air R_d = R / M_d, J kg-1 K-1.
R_DRY = MOLAR_GAS_CONSTANT / MOLAR_MASS_DRY_AIR

#: Specific heat of dry air at constant pressure, J kg-1 K-1: the ideal
#: diatomic gas value c_p = 7/2 R_d (common practice, no source).
CP_DRY = 3.5 * R_DRY

#: Poisson exponent R_d / c_p (= 2/7).
KAPPA = R_DRY / CP_DRY

#: Ratio of the molar masses of water and dry air.
EPSILON = MOLAR_MASS_WATER / MOLAR_MASS_DRY_AIR

#: Reference pressure of potential temperature, Pa (common practice, no source).
P0 = 100000.0

#: Kinematic viscosity of air near the ground, m2 s-1 (about 1.5e-5 at 15 C;
#: from memory). The molecular viscosity: far too small for the friction of
#: atmospheric flows (it gives a viscous term near 1e-11 m s-2).
NU_AIR = 1.5e-5

#: Eddy viscosity of a typical boundary layer, m2 s-1 (common practice, no source:
#: values of 1 to 100 m2 s-1 are usual, 10 a middle one). The friction estimate of
#: the scale analysis from data uses it.
EDDY_VISCOSITY = 10.0

#: Depth scale H of the textbook scale analysis: the depth of the troposphere, m
#: (Holton and Hakim 2013, An Introduction to Dynamic Meteorology, 5th ed., ch. 2,
#: H ~ 10 km).
TROPOSPHERE_DEPTH = 1.0e4

# U.S. Standard Atmosphere, 1976 (NOAA/NASA/USAF, Washington DC), which uses
# its own gas constant and molar mass: keep them apart from the values above so
# that the standard heights come out as tabulated.
STD_SEA_LEVEL_PRESSURE = 101325.0
STD_SEA_LEVEL_TEMPERATURE = 288.15
STD_GAS_CONSTANT = 8.31432
STD_MOLAR_MASS = 28.9644e-3
#: Base geopotential heights (m) and lapse rates (K m-1) of the layers up to 47 km.
STD_LAYERS = (
    (0.0, -0.0065),
    (11000.0, 0.0),
    (20000.0, 0.001),
    (32000.0, 0.0028),
    (47000.0, 0.0),
)
