"""Invented titration curves for the demo: KHP titrated with NaOH, pH from the exact charge balance.

Pure module (numpy and scipy; no Flask, no database). The demo's potentiometric run is generated
here, not typed: each replicate's pH readings come from the charge balance of potassium hydrogen
phthalate titrated with sodium hydroxide, solved for [H+], plus a little seeded noise the size of a
bench meter's last digit. The readings are invented; the chemistry they follow is not:

    [H+] + [Na+] + [K+] = [OH-] + [HP-] + 2 [P2-],  [K+] = c(KHP),
    [OH-] = Kw / [H+],  share of P2- = Ka2 / ([H+] + Ka2)

with Kw = 1.0e-14 and pKa2(phthalic acid) = 5.41 at 25 °C (CRC Handbook of Chemistry and Physics).
Volumes follow the way an analyst adds titrant: 1 mL steps far from the end point, 0.1 mL within
1 mL of it, 0.05 mL within 0.3 mL (common practice).
"""

from __future__ import annotations

import math

import numpy as np
from scipy.optimize import brentq

KW = 1.0e-14  # ion product of water at 25 °C (CRC Handbook of Chemistry and Physics)
KA2_PHTHALIC = 10**-5.41  # phthalic acid pKa2 5.41 at 25 °C (CRC Handbook of Chemistry and Physics)
KHP_MOLAR_MASS_G_MOL = 204.22  # C8H5KO4 (IUPAC standard atomic weights)


def _ph(balance: object) -> float:
    """pH where balance(h) = 0 for h = [H+] between 10^-14.5 and 1 mol/L (balance rises with h)."""
    return -math.log10(brentq(balance, 10**-14.5, 1.0, xtol=1e-22, rtol=1e-13))  # type: ignore[arg-type]


def khp_with_naoh_ph(volumes_ml: np.ndarray, *, khp_mol: float, v0_ml: float, c_naoh: float) -> np.ndarray:
    """pH after each volume of NaOH added to khp_mol of KHP dissolved in v0_ml of water.

    volumes_ml: mL of NaOH added; khp_mol: mol; v0_ml: mL; c_naoh: mol/L. Returns the pH of each point.
    """
    out = []
    for v in volumes_ml:
        total_l = (v0_ml + float(v)) / 1000.0
        c_p, na = khp_mol / total_l, c_naoh * float(v) / 1000.0 / total_l

        def balance(h: float, na: float = na, c_p: float = c_p) -> float:
            return h + na - KW / h - c_p * KA2_PHTHALIC / (h + KA2_PHTHALIC)

        out.append(_ph(balance))
    return np.array(out)


def additions(end_point_ml: float, last_ml: float) -> np.ndarray:
    """Volumes (mL) as an analyst adds them: 1 mL steps, 0.1 mL within 1 mL of the end point, 0.05 within 0.3."""
    vols, v = [0.0], 0.0
    while v < last_ml:
        d = min(abs(v - end_point_ml), abs(v + 1.0 - end_point_ml))
        if v <= end_point_ml <= v + 1.0:
            d = 0.0
        here = abs(v - end_point_ml)
        step = 0.05 if here < 0.3 else 0.1 if (here < 1.0 or d < 1.0) else 1.0
        v = round(v + step, 4)
        vols.append(v)
    return np.array(vols)


def khp_curve(
    mass_g: float, c_naoh: float, *, seed: int, noise_ph: float = 0.01, v0_ml: float = 50.0, past_ml: float = 3.0
) -> list[tuple[float, float]]:
    """One invented replicate's curve: (volume added, mL; pH) pairs to past_ml beyond the equivalence volume.

    mass_g: KHP weighed, g; c_naoh: the titrant's true molarity, mol/L; seed: the noise generator's seed;
    noise_ph: the standard deviation of the reading noise, pH; v0_ml: water the KHP is dissolved in, mL.
    Readings are rounded to 0.01 pH, as a bench meter shows them.
    """
    khp_mol = mass_g / KHP_MOLAR_MASS_G_MOL
    ve = khp_mol / c_naoh * 1000.0
    vols = additions(ve, ve + past_ml)
    ph = khp_with_naoh_ph(vols, khp_mol=khp_mol, v0_ml=v0_ml, c_naoh=c_naoh)
    rng = np.random.default_rng(seed)
    noisy = ph + rng.normal(0.0, noise_ph, size=len(ph))
    return [(float(v), round(float(e), 2)) for v, e in zip(vols, noisy, strict=True)]


def as_text(points: list[tuple[float, float]]) -> str:
    """The points as the run form's text box takes them: one "volume, pH" line each."""
    return "\n".join(f"{v:g}, {e:.2f}" for v, e in points)
