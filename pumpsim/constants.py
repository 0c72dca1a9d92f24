"""Physical constants, SI, from scipy.constants (CODATA values)."""

from scipy import constants as _c

hbar = _c.hbar
h = _c.h
c = _c.c
kB = _c.k
amu = _c.physical_constants["atomic mass constant"][0]
