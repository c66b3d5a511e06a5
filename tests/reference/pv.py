"""Photovoltaic references from pvlib (and CODATA constants from scipy).

pv.py points JSON: for each {il, i0, rs, rsh, a} print pvlib.pvsystem.singlediode
  results {i_sc, v_oc, i_mp, v_mp, p_mp} and i_from_v at the given "v".
pv.py desoto JSON: for each {g, t, alpha_sc, a_ref, il_ref, i0_ref, rsh_ref, rs}
  print pvlib.pvsystem.calcparams_desoto -> {il, i0, rs, rsh, a}.
pv.py tmy DAY: the day-of-year's 24 hourly GHI values from the TMY3 file
  shipped in pvlib's wheel (723170TYA.CSV, public NSRDB data).
pv.py tmy_year: the 8760 hourly GHI values of the same file.
pv.py day_energy JSON: given cell reference parameters, the hourly GHI list,
  the cell temperature, the converter's fractional-Voc setting and the
  intervals it ran, the energy drawn at that operating point (pvlib), J.
pv.py constants: k T / q at 300 K and 298.15 K from scipy.constants (CODATA 2018).
"""
import json
import os
import sys

import numpy as np
import pvlib
from scipy import constants


def points(spec):
    out = []
    for p in spec:
        r = pvlib.pvsystem.singlediode(p["il"], p["i0"], p["rs"], p["rsh"], p["a"])
        i_at = pvlib.pvsystem.i_from_v(p["v"], p["il"], p["i0"], p["rs"], p["rsh"], p["a"])
        out.append({k: float(r[k]) for k in ("i_sc", "v_oc", "i_mp", "v_mp", "p_mp")} | {"i_at_v": float(i_at)})
    return out


def desoto(spec):
    out = []
    for p in spec:
        il, i0, rs, rsh, a = pvlib.pvsystem.calcparams_desoto(
            p["g"], p["t"], p["alpha_sc"], p["a_ref"], p["il_ref"], p["i0_ref"], p["rsh_ref"], p["rs"],
            EgRef=1.121, dEgdT=-0.0002677)
        out.append({"il": float(il), "i0": float(i0), "rs": float(rs), "rsh": float(rsh), "a": float(a)})
    return out


def tmy_day(day_of_year):
    path = os.path.join(os.path.dirname(pvlib.__file__), "data", "723170TYA.CSV")
    data, _ = pvlib.iotools.read_tmy3(path, map_variables=True)
    ghi = data["ghi"].to_numpy()
    start = (day_of_year - 1) * 24
    return [float(v) for v in ghi[start:start + 24]]


def tmy_year():
    """All 8760 hourly GHI values of the TMY3 file, W/m²."""
    path = os.path.join(os.path.dirname(pvlib.__file__), "data", "723170TYA.CSV")
    data, _ = pvlib.iotools.read_tmy3(path, map_variables=True)
    return [float(v) for v in data["ghi"].to_numpy()]


def day_energy(spec):
    hourly = np.array(spec["hourly"], dtype=float)
    t = np.arange(0.0, 24 * 3600.0 + 1.0, 10.0)  # every 10 s
    centres = np.arange(24) * 3600.0 + 1800.0
    g = np.interp(t, centres, hourly, left=0.0, right=hourly[-1])
    g = np.where(t < 1800.0, hourly[0] * t / 1800.0, g)
    c = spec["cell"]
    il, i0, rs, rsh, a = pvlib.pvsystem.calcparams_desoto(
        np.maximum(g, 1e-9), spec["celsius"], c["alpha_sc"], c["a_ref"], c["il_ref"], c["i0_ref"], c["rsh_ref"], c["rs"],
        EgRef=1.121, dEgdT=-0.0002677)
    voc = pvlib.pvsystem.singlediode(il, i0, rs, rsh, a)["v_oc"]
    v = spec["fraction"] * voc
    i = pvlib.pvsystem.i_from_v(v, il, i0, rs, rsh, a)
    p = np.where(g > 0, v * np.maximum(i, 0.0), 0.0)
    running = np.zeros_like(t, dtype=bool)
    for start, end in spec["running"]:
        running |= (t >= start) & (t < end)
    return float(np.trapezoid(np.where(running, p, 0.0), t))


if __name__ == "__main__":
    what = sys.argv[1]
    if what == "points":
        print(json.dumps(points(json.loads(sys.argv[2]))))
    elif what == "desoto":
        print(json.dumps(desoto(json.loads(sys.argv[2]))))
    elif what == "tmy":
        print(json.dumps(tmy_day(int(sys.argv[2]))))
    elif what == "tmy_year":
        print(json.dumps(tmy_year()))
    elif what == "day_energy":
        print(json.dumps(day_energy(json.load(open(sys.argv[2])))))
    elif what == "constants":
        k, e = constants.k, constants.e
        print(json.dumps({"300": k * 300.0 / e, "298.15": k * 298.15 / e}))
