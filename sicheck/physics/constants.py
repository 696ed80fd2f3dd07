"""Physical constants (CODATA 2018 exact or recommended values)."""

import math

C0 = 299_792_458.0                 # speed of light in vacuum, m/s (exact)
MU0 = 1.25663706212e-6             # vacuum permeability, H/m (CODATA 2018)
EPS0 = 1.0 / (MU0 * C0 * C0)       # vacuum permittivity, F/m
ETA0 = MU0 * C0                    # wave impedance of free space, ohm (~376.73)
PI = math.pi
