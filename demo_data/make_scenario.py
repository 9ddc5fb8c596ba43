"""Write demo_data/scenario.json: the INVENTED demo scenario of a fictional prep room.

Run once by a developer (`python demo_data/make_scenario.py`); the JSON it writes is committed and is
what `stockroom demo` loads. Every name, lot and reading is invented. Readings are generated from a
chosen "true" molarity with bench-sized noise (a few parts in 10^4) so that the numbers stockroom
recomputes from them are chemically plausible. Days are relative to the day the demo is built (0 =
today), so the scenario always shows batches due, drifting and expired "now".
"""

from __future__ import annotations

import json
import random
from pathlib import Path

RNG = random.Random(20261201)

# Molar masses (g/mol) and densities (g/cm3) used only to generate plausible readings.
STD = {
    "Na2CO3": (105.988, 2.532, 2),
    "KHP": (204.221, 1.636, 1),
    "TRIS": (121.135, 1.33, 1),
    "borax": (381.37, 1.73, 2),
}
TITRANT_EQ = {"HCl": 1, "H2SO4": 2, "NaOH": 1}


def buoyancy(rho: float) -> float:
    return 1 + 0.0012 * (1 / rho - 1 / 8.0)


def primary_replicates(
    titrant: str,
    std: str,
    c_true: float,
    mass_range: tuple[float, float],
    n: int,
    purity: float,
    noise_rel: float = 1.5e-4,
    outlier: int | None = None,
) -> list[dict]:
    M, rho, eq = STD[std]
    nu = eq / TITRANT_EQ[titrant]
    reps = []
    for i in range(n):
        m = round(RNG.uniform(*mass_range), 4)
        tare = round(RNG.uniform(0.8, 1.6), 4)
        gross = round(tare + m, 4)
        m = gross - tare
        volume = 1000 * m * purity * nu * buoyancy(rho) / (M * c_true)
        volume *= 1 + RNG.gauss(0, noise_rel)
        if outlier is not None and i == outlier:
            volume *= 1.0045  # an over-shot end point
        blank = 0.03 if std == "KHP" else 0.0
        initial = round(RNG.uniform(0.02, 0.60), 2)
        final = round(initial + volume + blank, 2)
        reps.append(
            {
                "mass_gross_g": gross,
                "mass_tare_g": tare,
                "initial_ml": initial,
                "final_ml": final,
                "blank_ml": blank,
                "temperature_c": round(RNG.uniform(20.2, 22.4), 1),
            }
        )
    return reps


def secondary_replicates(
    titrant: str, reference: str, c_true: float, c_ref: float, n: int, aliquot: float = 25.0, noise_rel: float = 6e-4
) -> list[dict]:
    nu = TITRANT_EQ[reference] / TITRANT_EQ[titrant]
    reps = []
    for _ in range(n):
        v_ref = c_true * aliquot / (c_ref * nu) * (1 + RNG.gauss(0, noise_rel))
        initial = round(RNG.uniform(0.02, 0.50), 2)
        reps.append(
            {
                "aliquot_ml": aliquot,
                "initial_ml": initial,
                "final_ml": round(initial + v_ref, 2),
                "blank_ml": 0.0,
                "temperature_c": round(RNG.uniform(20.4, 22.0), 1),
            }
        )
    return reps


def main() -> None:
    lots = [
        {
            "key": "carbonate",
            "substance": "Na2CO3",
            "supplier": "Invented Fine Chemicals",
            "supplier_lot": "IFC-NC-4471 (invented)",
            "assay": 0.9998,
            "assay_U": 0.0004,
            "assay_k": 2,
            "expires_day": 540,
            "dried_day": -182,
            "dried_at_c": 280,
            "received_day": -200,
        },
        {
            "key": "khp",
            "substance": "KHP",
            "supplier": "Invented Fine Chemicals",
            "supplier_lot": "IFC-KP-2208 (invented)",
            "assay": 0.99995,
            "assay_U": 0.0004,
            "assay_k": 2,
            "expires_day": 700,
            "dried_day": -175,
            "dried_at_c": 120,
            "received_day": -200,
        },
        {
            "key": "tris",
            "substance": "TRIS",
            "supplier": "Northfield Reagents (invented)",
            "supplier_lot": "NR-T-0917 (invented)",
            "assay": 0.9995,
            "assay_U": 0.0010,
            "assay_k": 2,
            "expires_day": 400,
            "dried_day": -130,
            "dried_at_c": 100,
            "received_day": -150,
        },
    ]
    c_hcl1 = 0.1003
    batches = []
    # 1. HCl 0.1 M: in service since day -174, re-checked at -84.
    c = 0.10046
    batches.append(
        {
            "key": "hcl-a",
            "reagent": "HCl",
            "nominal_molarity": 0.1,
            "volume_l": 20.0,
            "prepared_day": -176,
            "prepared_by": "R. Okafor",
            "concentrate_lot": "HCl 37 % lot CA-1183 (invented)",
            "concentrate_assay_w_w": 0.372,
            "concentrate_density_g_ml": 1.185,
            "water_grade": "deionized, Type II",
            "container": "20 L HDPE carboy",
            "notes": "",
            "runs": [
                {
                    "day": -174,
                    "purpose": "certify",
                    "lot": "carbonate",
                    "analyst": "R. Okafor",
                    "endpoint": "bromocresol green, boiled near the end point",
                    "replicates": primary_replicates("HCl", "Na2CO3", c, (0.200, 0.225), 4, 0.9998),
                    "decision": "accept",
                },
                {
                    "day": -84,
                    "purpose": "recheck",
                    "lot": "carbonate",
                    "analyst": "M. Lindqvist",
                    "endpoint": "bromocresol green, boiled near the end point",
                    "replicates": primary_replicates("HCl", "Na2CO3", c * 1.0004, (0.200, 0.225), 3, 0.9998),
                    "decision": "accept",
                },
            ],
        }
    )
    # 2. HCl 1 M: certified against TRIS, used as the reference for the 1 M NaOH.
    batches.append(
        {
            "key": "hcl-1m",
            "reagent": "HCl",
            "nominal_molarity": 1.0,
            "volume_l": 10.0,
            "prepared_day": -122,
            "prepared_by": "M. Lindqvist",
            "concentrate_lot": "HCl 37 % lot CA-1183 (invented)",
            "concentrate_assay_w_w": 0.372,
            "concentrate_density_g_ml": 1.185,
            "water_grade": "deionized, Type II",
            "container": "10 L HDPE carboy",
            "notes": "",
            "runs": [
                {
                    "day": -120,
                    "purpose": "certify",
                    "lot": "tris",
                    "analyst": "M. Lindqvist",
                    "endpoint": "methyl red",
                    "burette_capacity_ml": 50.0,
                    "replicates": primary_replicates("HCl", "TRIS", c_hcl1 * 10, (4.35, 4.80), 5, 0.9995),
                    "decision": "accept",
                },
                {
                    "day": -30,
                    "purpose": "recheck",
                    "lot": "tris",
                    "analyst": "R. Okafor",
                    "endpoint": "methyl red",
                    "replicates": primary_replicates("HCl", "TRIS", c_hcl1 * 10 * 1.0006, (4.35, 4.80), 3, 0.9995),
                    "decision": "accept",
                },
            ],
        }
    )
    # 3. NaOH 0.1 M drifting: CO2 uptake lowers it at every re-check.
    c0 = 0.10031
    drift = [(-59, 0.0), (-45, -0.0011), (-31, -0.0027), (-17, -0.0046), (-3, -0.0068)]
    runs = []
    for i, (day, rel) in enumerate(drift):
        runs.append(
            {
                "day": day,
                "purpose": "certify" if i == 0 else "recheck",
                "lot": "khp",
                "analyst": "J. Abara" if i % 2 else "R. Okafor",
                "endpoint": "phenolphthalein, faint pink 30 s",
                "replicates": primary_replicates("NaOH", "KHP", c0 * (1 + rel), (0.80, 0.86), 4 if i == 0 else 3, 0.99995),
                "decision": "accept",
            }
        )
    batches.append(
        {
            "key": "naoh-drift",
            "reagent": "NaOH",
            "nominal_molarity": 0.1,
            "volume_l": 20.0,
            "prepared_day": -61,
            "prepared_by": "J. Abara",
            "concentrate_lot": "NaOH 50 % lot SH-559 (invented)",
            "concentrate_assay_w_w": 0.50,
            "concentrate_density_g_ml": 1.52,
            "water_grade": "boiled, CO2-free deionized",
            "container": "20 L polyethylene carboy, soda-lime guard tube",
            "notes": "soda-lime guard tube found exhausted at the third re-check and replaced",
            "runs": runs,
        }
    )
    # 4. NaOH 0.1 M expired, re-standardized once (the later release supersedes the first).
    c1, c2 = 0.09987, 0.09958
    batches.append(
        {
            "key": "naoh-old",
            "reagent": "NaOH",
            "nominal_molarity": 0.1,
            "volume_l": 20.0,
            "prepared_day": -172,
            "prepared_by": "R. Okafor",
            "concentrate_lot": "NaOH 50 % lot SH-512 (invented)",
            "concentrate_assay_w_w": 0.50,
            "concentrate_density_g_ml": 1.52,
            "water_grade": "boiled, CO2-free deionized",
            "container": "20 L polyethylene carboy, soda-lime guard tube",
            "notes": "",
            "runs": [
                {
                    "day": -170,
                    "purpose": "certify",
                    "lot": "khp",
                    "analyst": "R. Okafor",
                    "endpoint": "phenolphthalein, faint pink 30 s",
                    "replicates": primary_replicates("NaOH", "KHP", c1, (0.80, 0.86), 4, 0.99995),
                    "decision": "accept",
                },
                {
                    "day": -156,
                    "purpose": "recheck",
                    "lot": "khp",
                    "analyst": "J. Abara",
                    "endpoint": "phenolphthalein, faint pink 30 s",
                    "replicates": primary_replicates("NaOH", "KHP", c1 * 0.9992, (0.80, 0.86), 3, 0.99995),
                    "decision": "accept",
                },
                {
                    "day": -142,
                    "purpose": "certify",
                    "lot": "khp",
                    "analyst": "J. Abara",
                    "endpoint": "phenolphthalein, faint pink 30 s",
                    "replicates": primary_replicates("NaOH", "KHP", c2, (0.80, 0.86), 4, 0.99995),
                    "decision": "accept",
                },
            ],
        }
    )
    # 5. NaOH 1 M: secondary standardization against the 1 M HCl; its re-check is now due.
    batches.append(
        {
            "key": "naoh-1m",
            "reagent": "NaOH",
            "nominal_molarity": 1.0,
            "volume_l": 10.0,
            "prepared_day": -22,
            "prepared_by": "J. Abara",
            "concentrate_lot": "NaOH 50 % lot SH-559 (invented)",
            "concentrate_assay_w_w": 0.50,
            "concentrate_density_g_ml": 1.52,
            "water_grade": "boiled, CO2-free deionized",
            "container": "10 L polyethylene carboy, soda-lime guard tube",
            "notes": "",
            "runs": [
                {
                    "day": -20,
                    "purpose": "certify",
                    "method": "secondary",
                    "reference": "hcl-1m",
                    "analyst": "J. Abara",
                    "endpoint": "phenolphthalein",
                    "replicates": secondary_replicates("NaOH", "HCl", 0.9968, c_hcl1 * 10, 4),
                    "decision": "accept",
                },
            ],
        }
    )
    # 6. H2SO4 0.1 M: a first run rejected for scatter, a second accepted.
    c = 0.10012
    bad = primary_replicates("H2SO4", "Na2CO3", c, (0.410, 0.440), 4, 0.9998, noise_rel=2.2e-3)
    batches.append(
        {
            "key": "h2so4-a",
            "reagent": "H2SO4",
            "nominal_molarity": 0.1,
            "volume_l": 20.0,
            "prepared_day": -92,
            "prepared_by": "M. Lindqvist",
            "concentrate_lot": "H2SO4 96 % lot SU-310 (invented)",
            "concentrate_assay_w_w": 0.96,
            "concentrate_density_g_ml": 1.84,
            "water_grade": "deionized, Type II",
            "container": "20 L HDPE carboy",
            "notes": "",
            "runs": [
                {
                    "day": -90,
                    "purpose": "certify",
                    "lot": "carbonate",
                    "analyst": "M. Lindqvist",
                    "endpoint": "bromocresol green",
                    "replicates": bad,
                    "decision": "reject",
                    "reason": "scatter too wide: CO2 not boiled off near the end point",
                },
                {
                    "day": -89,
                    "purpose": "certify",
                    "lot": "carbonate",
                    "analyst": "M. Lindqvist",
                    "endpoint": "bromocresol green, boiled near the end point",
                    "replicates": primary_replicates("H2SO4", "Na2CO3", c, (0.410, 0.440), 4, 0.9998),
                    "decision": "accept",
                },
                {
                    "day": -2,
                    "purpose": "recheck",
                    "lot": "carbonate",
                    "analyst": "R. Okafor",
                    "endpoint": "bromocresol green, boiled near the end point",
                    "replicates": primary_replicates("H2SO4", "Na2CO3", c * 1.0007, (0.410, 0.440), 3, 0.9998),
                    "decision": "accept",
                },
            ],
        }
    )
    # 7. H2SO4 1 M: made yesterday, awaiting standardization.
    batches.append(
        {
            "key": "h2so4-1m",
            "reagent": "H2SO4",
            "nominal_molarity": 1.0,
            "volume_l": 10.0,
            "prepared_day": -1,
            "prepared_by": "R. Okafor",
            "concentrate_lot": "H2SO4 96 % lot SU-310 (invented)",
            "concentrate_assay_w_w": 0.96,
            "concentrate_density_g_ml": 1.84,
            "water_grade": "deionized, Type II",
            "container": "10 L HDPE carboy",
            "notes": "",
            "runs": [],
        }
    )
    # 8. HCl 0.1 M withdrawn after a contamination, with an outlier excluded in its run.
    c = 0.09978
    reps = primary_replicates("HCl", "Na2CO3", c, (0.200, 0.225), 5, 0.9998, outlier=2)
    batches.append(
        {
            "key": "hcl-b",
            "reagent": "HCl",
            "nominal_molarity": 0.1,
            "volume_l": 20.0,
            "prepared_day": -150,
            "prepared_by": "M. Lindqvist",
            "concentrate_lot": "HCl 37 % lot CA-1183 (invented)",
            "concentrate_assay_w_w": 0.372,
            "concentrate_density_g_ml": 1.185,
            "water_grade": "deionized, Type II",
            "container": "20 L HDPE carboy",
            "notes": "",
            "runs": [
                {
                    "day": -148,
                    "purpose": "certify",
                    "lot": "carbonate",
                    "analyst": "M. Lindqvist",
                    "endpoint": "bromocresol green, boiled near the end point",
                    "replicates": reps,
                    "exclusions": [{"position": 3, "reason": "end point overshot (flask swirled late)"}],
                    "decision": "accept",
                },
            ],
            "withdrawn": {"day": -101, "reason": "carboy tap leaked; contents possibly diluted (invented scenario)"},
        }
    )
    scenario = {
        "invented": True,
        "title": "Hollowbrook College chemistry prep room (an invented scenario)",
        "about": "Every name, supplier, lot number and reading in this file is invented for demonstration.",
        "users": [
            {"username": "okafor", "display_name": "R. Okafor", "role": "staff"},
            {"username": "lindqvist", "display_name": "M. Lindqvist", "role": "staff"},
            {"username": "abara", "display_name": "J. Abara", "role": "staff"},
            {"username": "demo-instructor", "display_name": "Demo Instructor", "role": "instructor"},
            {"username": "demo-admin", "display_name": "Demo Admin", "role": "admin"},
        ],
        "lots": lots,
        "batches": batches,
    }
    out = Path(__file__).with_name("scenario.json")
    out.write_text(json.dumps(scenario, indent=1) + "\n")
    print(f"wrote {out}")


if __name__ == "__main__":
    main()
