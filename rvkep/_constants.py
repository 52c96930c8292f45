"""Numerical constants shared by the numpy and compiled Kepler kernels (Markley 1995)."""

import math

PI = math.pi
TWO_PI = 2.0 * math.pi
ALPHA_DEN = PI * PI - 6.0
ALPHA_A = 3.0 * PI * PI / ALPHA_DEN
ALPHA_B = 1.6 * PI / ALPHA_DEN
SMALL_E = 0.25  # below this |E|, E - sin E comes from its series
