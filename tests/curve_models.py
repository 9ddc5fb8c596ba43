"""Titration curves from the exact charge balance, solved for [H+] with scipy.optimize.brentq (tests only)."""

from __future__ import annotations

import numpy as np
from scipy.optimize import brentq

KW = 1.0e-14  # ion product of water at 25 °C (CRC Handbook of Chemistry and Physics)
KA2_PHTHALIC = 10**-5.41  # phthalic acid pKa2 5.41 (CRC Handbook of Chemistry and Physics)
KA1_CARBONIC, KA2_CARBONIC = 10**-6.35, 10**-10.33  # carbonic acid pKa1, pKa2 (CRC Handbook)


def _ph(balance) -> float:
    """pH where balance(h) = 0, h = [H+] in mol/L between 1e-14.5 and 1 (balance rises with h)."""
    return -float(np.log10(brentq(balance, 10**-14.5, 1.0, xtol=1e-22, rtol=1e-13)))


def khp_with_naoh(volumes_ml, *, khp_mol=0.001, v0_ml=50.0, c_naoh=0.1):
    """pH of khp_mol of KHP in v0_ml of water after each volume of NaOH (HP- <-> P2- only)."""
    out = []
    for v in volumes_ml:
        total_l = (v0_ml + v) / 1000
        c_p, na = khp_mol / total_l, c_naoh * v / 1000 / total_l

        def balance(h, na=na, c_p=c_p):  # [H+] + [Na+] + [K+] = [OH-] + [HP-] + 2 [P2-], with [K+] = c_p
            a2 = KA2_PHTHALIC / (h + KA2_PHTHALIC)
            return h + na - KW / h - c_p * a2

        out.append(_ph(balance))
    return np.array(out)


def carbonate_with_hcl(volumes_ml, *, na2co3_mol=0.00125, v0_ml=50.0, c_hcl=0.1):
    """pH of na2co3_mol of Na2CO3 in v0_ml of water after each volume of HCl (closed system)."""
    out = []
    for v in volumes_ml:
        total_l = (v0_ml + v) / 1000
        c_c, cl = na2co3_mol / total_l, c_hcl * v / 1000 / total_l
        na = 2 * c_c

        def balance(h, na=na, cl=cl, c_c=c_c):  # [H+] + [Na+] = [OH-] + [Cl-] + [HCO3-] + 2 [CO3 2-]
            d = h * h + KA1_CARBONIC * h + KA1_CARBONIC * KA2_CARBONIC
            return h + na - KW / h - cl - c_c * (KA1_CARBONIC * h + 2 * KA1_CARBONIC * KA2_CARBONIC) / d

        out.append(_ph(balance))
    return np.array(out)


def strong_acid_with_naoh(volumes_ml, *, hcl_mol=0.001, v0_ml=50.0, c_naoh=0.1):
    """pH of hcl_mol of HCl in v0_ml of water after each volume of NaOH."""
    out = []
    for v in volumes_ml:
        total_l = (v0_ml + v) / 1000
        cl, na = hcl_mol / total_l, c_naoh * v / 1000 / total_l
        out.append(_ph(lambda h, cl=cl, na=na: h + na - KW / h - cl))
    return np.array(out)


def schedule(end_points_ml, last_ml, *, coarse=1.0, fine=0.1, finer=0.05, near=1.0, nearest=0.3):
    """Volumes as an analyst adds them: coarse steps far away, finer near each end point (mL)."""
    vols, v = [0.0], 0.0
    while v < last_ml:
        # The distance from the interval a coarse step would cover to the nearest end point.
        d = min(0.0 if v <= ep <= v + coarse else min(abs(v - ep), abs(v + coarse - ep)) for ep in end_points_ml)
        d_here = min(abs(v - ep) for ep in end_points_ml)
        step = finer if d_here < nearest else fine if d_here < near else coarse
        if step == coarse and d < near:
            step = fine
        v = round(v + step, 4)
        vols.append(v)
    return np.array(vols)
