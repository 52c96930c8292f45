"""Numerical constants shared by the numpy and compiled Kepler kernels (Markley 1995)."""

import math

PI = math.pi
TWO_PI = 2.0 * math.pi
ALPHA_DEN = PI * PI - 6.0
ALPHA_A = 3.0 * PI * PI / ALPHA_DEN
ALPHA_B = 1.6 * PI / ALPHA_DEN
SMALL_E = 0.25  # below this |E|, E - sin E comes from its series

# The kinds of the packed prior table (rvkep.priors.PriorTable and PriorCode), read by
# the numpy log prior and the compiled log posterior alike: one enumeration, no codes
# matched by convention.
PRIOR_GENERAL = 0  # the prior's own logpdf (numpy path only)
PRIOR_UNIFORM = 1  # uniform on [a, b], log density c = -ln(b - a)
PRIOR_LOGUNIFORM = 2  # 1/x on [a, b], c = -ln ln(b / a)
PRIOR_NORMAL = 3  # mean a, sd b, c = -ln b - ln sqrt(2 pi)
