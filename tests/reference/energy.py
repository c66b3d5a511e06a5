"""Energies from calibrated samples by numpy's and scipy's trapezoidal rule.

energy.py SAMPLES_CSV: columns t_us,input_uv,input_na,output_uv,output_na.
Prints JSON {drawn_nj, delivered_nj} from numpy.trapezoid and scipy's
integrate.trapezoid (they must agree), plus the textbook worked examples.
"""
import json
import sys

import numpy as np
from scipy import integrate

data = np.loadtxt(sys.argv[1], delimiter=",", skiprows=1, dtype=np.float64)
t = data[:, 0] * 1e-6
p_in = data[:, 1] * 1e-6 * data[:, 2] * 1e-9
p_out = data[:, 3] * 1e-6 * data[:, 4] * 1e-9
drawn = np.trapezoid(p_in, t)
delivered = np.trapezoid(p_out, t)
assert abs(integrate.trapezoid(p_in, t) - drawn) <= 1e-12 * max(1.0, abs(drawn))
# Worked examples (Burden and Faires, Numerical Analysis, from memory):
x = np.linspace(0.0, 1.0, 11)
assert abs(np.trapezoid(x**2, x) - 0.335) < 1e-15
x = np.linspace(0.0, np.pi, 11)
assert abs(np.trapezoid(np.sin(x), x) - 1.983523538) < 1e-9
print(json.dumps({"drawn_nj": drawn * 1e9, "delivered_nj": delivered * 1e9}))
