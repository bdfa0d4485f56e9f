#!/usr/bin/env python3
"""Real-gas reference for the isentropic end-of-compression state of air.

Writes real_gas_air_isentropic.csv beside this script. For a geometric volume ratio r = 17 and intake
temperatures T1 in {-40, -30, -20, -10, 0, 20} degC at p1 = 101.325 kPa it computes, with CoolProp's
'Air' pseudo-pure fluid (HEOS backend: the Lemmon, Jacobsen, Penoncello & Friend 2000 reference
equation of state for air):

  s1 = s(T1, p1), rho1 = rho(T1, p1), rho2 = r * rho1,
  T2 such that s(T2, rho2) = s1 (bisection on T, entropy rises with T at fixed density),
  p2 = p(T2, rho2).

It also repeats the same path from p1 = 1 Pa (the dilute, ideal-gas limit of the same equation of
state) and records T2 as t2_dilute_k, so that the real-gas (density) effect can be told apart from the
difference between CoolProp's and Burcat's ideal-gas cp.

Columns: t1_c, rho1, rho2, t2_real_k, p2_real_pa, coolprop_version, t2_dilute_k, p1_pa
(rho in kg/m^3, T in K, p in Pa).

Second output, air_second_virial.csv (t_k, b_m3_per_mol, coolprop_version): the second virial
coefficient B(T) of the same equation of state from 200 to 2000 K, and a least-squares fit
B(T) = sum_k c_k (100 K / T)^k, k = 0..4, over 200-1500 K, printed for src/air.rs (the model's
real-gas correction is a second-virial equation of state with this B).

Requirements: `pip install CoolProp` (PyPI; numpy comes with it).
"""

import csv
import os

import CoolProp
import numpy as np
from CoolProp.CoolProp import PropsSI

FLUID = "HEOS::Air"
R_VOLUME = 17.0
P1_PA = 101_325.0
T1_C = [-40.0, -30.0, -20.0, -10.0, 0.0, 20.0]
B_FIT_T0_K = 100.0
B_FIT_RANGE_K = (200.0, 1500.0)


def end_state(t1_k, p1_pa, r):
    """Isentropic compression by volume ratio r: returns (rho1, rho2, t2_k, p2_pa)."""
    s1 = PropsSI("Smass", "T", t1_k, "P", p1_pa, FLUID)
    rho1 = PropsSI("Dmass", "T", t1_k, "P", p1_pa, FLUID)
    rho2 = r * rho1
    lo, hi = t1_k, 3.0 * t1_k * r ** 0.4  # end temperature lies between T1 and well above gamma=1.4
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        if PropsSI("Smass", "T", mid, "Dmass", rho2, FLUID) < s1:
            lo = mid
        else:
            hi = mid
        if hi - lo < 1e-9:
            break
    t2_k = 0.5 * (lo + hi)
    p2_pa = PropsSI("P", "T", t2_k, "Dmass", rho2, FLUID)
    return rho1, rho2, t2_k, p2_pa


def main():
    version = CoolProp.__version__
    out = os.path.join(os.path.dirname(os.path.abspath(__file__)), "real_gas_air_isentropic.csv")
    with open(out, "w", newline="") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(["t1_c", "rho1", "rho2", "t2_real_k", "p2_real_pa", "coolprop_version", "t2_dilute_k", "p1_pa"])
        for t1_c in T1_C:
            t1_k = t1_c + 273.15
            rho1, rho2, t2_k, p2_pa = end_state(t1_k, P1_PA, R_VOLUME)
            _, _, t2_dilute_k, _ = end_state(t1_k, 1.0, R_VOLUME)
            w.writerow([
                f"{t1_c:.2f}", f"{rho1:.6f}", f"{rho2:.6f}", f"{t2_k:.4f}", f"{p2_pa:.1f}", version,
                f"{t2_dilute_k:.4f}", f"{P1_PA:.3f}",
            ])
            print(f"T1 {t1_c:6.1f} C  rho1 {rho1:.4f}  rho2 {rho2:.3f}  T2 real {t2_k:.3f} K  "
                  f"p2 {p2_pa / 1e3:.1f} kPa  T2 dilute {t2_dilute_k:.3f} K")
    print("wrote", out, "with CoolProp", version)
    write_second_virial(version)


def second_virial_m3_per_mol(t_k):
    # CoolProp's Bvirial for a pseudo-pure fluid is per mole (m^3/mol).
    return PropsSI("Bvirial", "T", t_k, "Dmass", 1e-4, FLUID)


def write_second_virial(version):
    out = os.path.join(os.path.dirname(os.path.abspath(__file__)), "air_second_virial.csv")
    table_t = np.arange(200.0, 2000.0 + 1e-9, 50.0)
    with open(out, "w", newline="") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(["t_k", "b_m3_per_mol", "coolprop_version"])
        for t in table_t:
            w.writerow([f"{t:.1f}", f"{second_virial_m3_per_mol(t):.6e}", version])
    fit_t = np.linspace(*B_FIT_RANGE_K, 131)
    b = np.array([second_virial_m3_per_mol(t) for t in fit_t])
    x = B_FIT_T0_K / fit_t
    a = np.vstack([x ** k for k in range(5)]).T
    c, *_ = np.linalg.lstsq(a, b, rcond=None)
    resid = a @ c - b
    print("wrote", out)
    print(f"B fit over {B_FIT_RANGE_K} K, x = {B_FIT_T0_K} K / T, max residual "
          f"{abs(resid).max() * 1e6:.3f} cm^3/mol; coefficients (m^3/mol):")
    print("[" + ", ".join(f"{v:.9e}" for v in c) + "]")


if __name__ == "__main__":
    main()
