"""Physical corrections for titrimetry: air buoyancy, air and water density, temperature, burette readings.

Pure module: plain floats in and out; no web or database import.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from stockroom.errors import FieldError, InvalidInput, StockroomError


class ReadingError(StockroomError):
    """A burette reading or blank that cannot be right (negative, reversed, blank not below titre)."""

    status = 422


# Conventional air density and density of stainless-steel weights used for the buoyancy correction
# (OIML R 111 conventional values; Harvey, Analytical Chemistry 2.1, appendix on buoyancy).
RHO_AIR_DEFAULT_G_CM3 = 0.0012
RHO_WEIGHTS_G_CM3 = 8.0

# Relative change of a dilute aqueous titrant's molarity per kelvin (EURACHEM/CITAC QUAM:2012 uses
# 2.1e-4 /K, the volume expansion coefficient of water near 20 °C).
ALPHA_WATER_PER_K = 2.1e-4

# Cubic expansion coefficient of borosilicate glass 3.3, the glass of Class A burettes (ISO 4787 uses
# 9.9e-6 /K — from memory, verify).
GAMMA_BOROSILICATE_PER_K = 9.9e-6

# Volumetric glassware is graduated to deliver its nominal volume at 20 °C (ASTM E287, ISO 385), and
# certified molarities are stated at the same temperature.
REFERENCE_TEMPERATURE_C = 20.0


def _number(field: str, value: float) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise InvalidInput([FieldError(field, f"must be a finite number (got {value!r})")])
    return float(value)


def _positive(field: str, value: float) -> float:
    v = _number(field, value)
    if v <= 0:
        raise InvalidInput([FieldError(field, f"must be above zero (got {value!r})")])
    return v


# ---------------------------------------------------------------------------------------------------------
# Air density: CIPM-2007 (Picard, Davis, Gläser, Fujii, Metrologia 45 (2008) 149-155)

_R = 8.314472  # J/(mol K), the value adopted in CIPM-2007
_M_V = 18.01528e-3  # kg/mol, water
# Saturation vapour pressure over water, psv = exp(A T² + B T + C + D/T) Pa
_A = 1.2378847e-5  # K^-2
_B = -1.9121316e-2  # K^-1
_C = 33.93711047
_D = -6.3431645e3  # K
# Enhancement factor f = alpha + beta p + gamma t²
_F_ALPHA = 1.00062
_F_BETA = 3.14e-8  # Pa^-1
_F_GAMMA = 5.6e-7  # K^-2
# Compressibility factor Z
_A0 = 1.58123e-6  # K Pa^-1
_A1 = -2.9331e-8  # Pa^-1
_A2 = 1.1043e-10  # K^-1 Pa^-1
_B0 = 5.707e-6  # K Pa^-1
_B1 = -2.051e-8  # Pa^-1
_C0 = 1.9898e-4  # K Pa^-1
_C1 = -2.376e-6  # Pa^-1
_D0 = 1.83e-11  # K^2 Pa^-2
_E0 = -0.765e-8  # K^2 Pa^-2


def air_density(t_c: float, p_hpa: float, rh_percent: float, x_co2: float = 0.0004) -> float:
    """Density of moist air by the CIPM-2007 equation.

    t_c: air temperature, °C. p_hpa: barometric pressure, hPa. rh_percent: relative humidity, %
    (0–100). x_co2: mole fraction of CO2 (0.0004 is typical laboratory air). Returns g/cm3.
    The equation is validated for 15–27 °C and 600–1100 hPa; outside that it still gives a value
    with a larger uncertainty.
    """
    t = _number("t_c", t_c)
    if not -40.0 <= t <= 100.0:
        raise InvalidInput([FieldError("t_c", f"{t:g} °C is outside any weighing room (−40 to 100 °C)")])
    p = _positive("p_hpa", p_hpa) * 100.0  # Pa
    h_pct = _number("rh_percent", rh_percent)
    if not 0.0 <= h_pct <= 100.0:
        raise InvalidInput([FieldError("rh_percent", f"must be between 0 and 100 % (got {rh_percent!r})")])
    x_c = _number("x_co2", x_co2)
    if not 0.0 <= x_c < 0.01:
        raise InvalidInput([FieldError("x_co2", f"is a mole fraction, e.g. 0.0004 (got {x_co2!r})")])

    h = h_pct / 100.0
    temp_k = t + 273.15
    m_a = (28.96546 + 12.011 * (x_c - 0.0004)) * 1e-3  # kg/mol, dry air with this CO2 content
    p_sv = math.exp(_A * temp_k**2 + _B * temp_k + _C + _D / temp_k)
    f = _F_ALPHA + _F_BETA * p + _F_GAMMA * t**2
    x_v = h * f * p_sv / p
    z = (
        1.0
        - (p / temp_k) * (_A0 + _A1 * t + _A2 * t**2 + (_B0 + _B1 * t) * x_v + (_C0 + _C1 * t) * x_v**2)
        + (p / temp_k) ** 2 * (_D0 + _E0 * x_v**2)
    )
    rho_kg_m3 = p * m_a / (z * _R * temp_k) * (1.0 - x_v * (1.0 - _M_V / m_a))
    return rho_kg_m3 / 1000.0


# ---------------------------------------------------------------------------------------------------------
# Buoyancy


def buoyancy_factor(
    rho_object_g_cm3: float,
    rho_air_g_cm3: float = RHO_AIR_DEFAULT_G_CM3,
    rho_weights_g_cm3: float = RHO_WEIGHTS_G_CM3,
) -> float:
    """Factor turning a balance reading in air into the mass in vacuum, 1 + ρa(1/ρobj − 1/ρw).

    rho_object_g_cm3: density of what is weighed, g/cm3. rho_air_g_cm3: air density, g/cm3.
    rho_weights_g_cm3: density of the balance's calibration weights, g/cm3. Returns a dimensionless
    factor (above 1 for anything less dense than steel).
    """
    rho_obj = _positive("rho_object_g_cm3", rho_object_g_cm3)
    rho_w = _positive("rho_weights_g_cm3", rho_weights_g_cm3)
    rho_a = _number("rho_air_g_cm3", rho_air_g_cm3)
    if rho_a < 0:
        raise InvalidInput([FieldError("rho_air_g_cm3", f"cannot be negative (got {rho_air_g_cm3!r})")])
    return 1.0 + rho_a * (1.0 / rho_obj - 1.0 / rho_w)


def true_mass(
    mass_air_g: float,
    rho_object_g_cm3: float,
    rho_air_g_cm3: float = RHO_AIR_DEFAULT_G_CM3,
    rho_weights_g_cm3: float = RHO_WEIGHTS_G_CM3,
) -> float:
    """Mass in vacuum of something that read mass_air_g on the balance.

    mass_air_g: balance reading, g. Densities as for buoyancy_factor, g/cm3. Returns the mass, g.
    """
    m = _number("mass_air_g", mass_air_g)
    if m < 0:
        raise InvalidInput([FieldError("mass_air_g", f"cannot be negative (got {mass_air_g!r})")])
    return m * buoyancy_factor(rho_object_g_cm3, rho_air_g_cm3, rho_weights_g_cm3)


# ---------------------------------------------------------------------------------------------------------
# Water density: Tanaka, Girard, Davis, Peuto, Bignell, Metrologia 38 (2001) 301-309
# (SMOW, air-free, 101325 Pa; valid 0–40 °C).

_TANAKA_A1 = -3.983035  # °C
_TANAKA_A2 = 301.797  # °C
_TANAKA_A3 = 522528.9  # °C²
_TANAKA_A4 = 69.34881  # °C
_TANAKA_A5 = 999.974950  # kg/m3


def water_density(t_c: float) -> float:
    """Density of pure air-free water by the Tanaka et al. (2001) equation.

    t_c: temperature, °C (0–40, the range the equation was fitted over). Returns kg/m3.
    """
    t = _number("t_c", t_c)
    if not 0.0 <= t <= 40.0:
        raise InvalidInput([FieldError("t_c", f"the water-density equation holds for 0–40 °C (got {t:g})")])
    return _TANAKA_A5 * (1.0 - (t + _TANAKA_A1) ** 2 * (t + _TANAKA_A2) / (_TANAKA_A3 * (t + _TANAKA_A4)))


# ---------------------------------------------------------------------------------------------------------
# Temperature of the titrant


def molarity_at_temperature(c_mol_l: float, from_c: float, to_c: float, alpha_per_k: float = ALPHA_WATER_PER_K) -> float:
    """Molarity of a dilute aqueous solution moved from one temperature to another, linear model.

    c_mol_l: molarity at from_c, mol/L. from_c, to_c: temperatures, °C. alpha_per_k: volume expansion
    coefficient of the solution, 1/K. Returns c·[1 − α(to − from)] in mol/L (QUAM:2012).
    """
    c = _number("c_mol_l", c_mol_l)
    t1 = _number("from_c", from_c)
    t2 = _number("to_c", to_c)
    a = _number("alpha_per_k", alpha_per_k)
    return c * (1.0 - a * (t2 - t1))


def molarity_at_temperature_by_water_density(c_mol_l: float, from_c: float, to_c: float) -> float:
    """Molarity moved between temperatures assuming the solution expands as pure water does.

    c_mol_l: molarity at from_c, mol/L. from_c, to_c: temperatures, °C (0–40). Returns
    c·ρw(to)/ρw(from) in mol/L; for 0.1 mol/L titrants the solute changes the expansion little.
    """
    c = _number("c_mol_l", c_mol_l)
    return c * water_density(to_c) / water_density(from_c)


def volume_at_20c(
    volume_ml: float,
    t_c: float,
    alpha_per_k: float = ALPHA_WATER_PER_K,
    glass_gamma_per_k: float = GAMMA_BOROSILICATE_PER_K,
) -> float:
    """Volume at 20 °C of the solution a 20 °C-graduated burette delivered at t_c.

    volume_ml: volume read on the burette, mL. t_c: temperature of the solution and burette, °C.
    alpha_per_k: expansion coefficient of the solution, 1/K. glass_gamma_per_k: cubic expansion of the
    burette glass, 1/K (0 to ignore it). Returns mL.

    Why: a molarity computed with this volume is the molarity at 20 °C, the temperature certificates
    state. Two effects: the glass between two marks holds V·[1 + γ(t − 20)] at t (it is graduated at
    20 °C), and that liquid shrinks by [1 − α(t − 20)] when brought to 20 °C. At 25 °C with the defaults
    the second is about 20 times the first (−1.05e-3 against +5e-5).
    """
    v = _number("volume_ml", volume_ml)
    if v < 0:
        raise ReadingError(f"a delivered volume cannot be negative (got {v:g} mL)")
    dt = _number("t_c", t_c) - REFERENCE_TEMPERATURE_C
    a = _number("alpha_per_k", alpha_per_k)
    g = _number("glass_gamma_per_k", glass_gamma_per_k)
    return v * (1.0 + g * dt) * (1.0 - a * dt)


# ---------------------------------------------------------------------------------------------------------
# Burette readings


def delivered_volume(initial_ml: float, final_ml: float) -> float:
    """Volume delivered between two burette readings.

    initial_ml, final_ml: readings, mL (a burette reads downward, so final >= initial).
    Returns final − initial in mL. Raises ReadingError for a negative or reversed pair.
    """
    i = _number("initial_ml", initial_ml)
    f = _number("final_ml", final_ml)
    if i < 0 or f < 0:
        raise ReadingError(f"burette readings cannot be negative (initial {i:g} mL, final {f:g} mL)")
    if f < i:
        raise ReadingError(f"the final reading {f:g} mL is below the initial {i:g} mL; are they swapped?")
    return f - i


def net_titre(volume_ml: float, blank_ml: float = 0.0) -> float:
    """Titre less the blank.

    volume_ml: volume delivered for the sample, mL. blank_ml: volume the blank took, mL (>= 0).
    Returns volume − blank in mL. Raises ReadingError when the blank is negative or not below the titre.
    """
    v = _number("volume_ml", volume_ml)
    b = _number("blank_ml", blank_ml)
    if b < 0:
        raise ReadingError(f"a blank cannot be negative (got {b:g} mL)")
    if b >= v:
        raise ReadingError(f"the blank ({b:g} mL) is not below the titre ({v:g} mL): check the readings or the blank")
    return v - b


# ---------------------------------------------------------------------------------------------------------
# How a titrant's density (hence its molarity) follows temperature

# Up to this molarity a titrant is taken to expand exactly as pure water does. Why 0.2 mol/L: the solute's
# own share of the expansion grows about linearly with concentration, and for 1 mol/L HCl and NaOH it adds
# 0.5e-4 and 1.0e-4 /K to water's 2.07e-4 /K (the tables cited on AQUEOUS_HCL and AQUEOUS_NAOH below). At
# 0.2 mol/L that is at most 2e-5 /K, so over a ±3 K lab range at most 6e-5 relative: below a tenth of the
# 0.2 % RSD acceptance limit and below the temperature term the budget already carries.
DILUTE_LIMIT_MOL_L = 0.2


@dataclass(frozen=True)
class ExpansionModel:
    """How the density of one kind of titrant solution follows temperature.

    kind "aqueous": density of pure water (Tanaka et al. 2001) plus, above dilute_limit_mol_l, the
    solute's excess density ρ_solution − ρ_water, taken from tabulated (t °C, kg/m3) points at one
    reference strength (reference_molality_mol_kg, solute_molar_mass_g_mol) and scaled in proportion
    to molarity (a quadratic in t through the points). kind "linear": a fixed cubic expansion
    coefficient alpha_per_k, 1/K, for media other than water (e.g. a titrant in acetic acid).
    source names the table the numbers come from; valid_to_mol_l is the strength up to which the
    proportional scaling is trusted, mol/L.
    """

    key: str
    kind: str = "aqueous"
    excess_points: tuple[tuple[float, float], ...] = ()
    reference_molality_mol_kg: float = 0.0
    solute_molar_mass_g_mol: float = 0.0
    alpha_per_k: float = 0.0
    dilute_limit_mol_l: float = DILUTE_LIMIT_MOL_L
    valid_to_mol_l: float = 2.0
    source: str = ""

    def __post_init__(self) -> None:
        if self.kind not in ("aqueous", "linear"):
            raise ValueError(f"{self.key}: kind must be 'aqueous' or 'linear', got {self.kind!r}")
        if self.excess_points and len(self.excess_points) != 3:
            raise ValueError(f"{self.key}: give three (t, excess density) points for the quadratic")

    def excess_density(self, t_c: float) -> float:
        """ρ_solution − ρ_water at the reference strength, kg/m3, at t_c °C (0 when no points)."""
        if not self.excess_points:
            return 0.0
        (t0, y0), (t1, y1), (t2, y2) = self.excess_points
        # Lagrange's quadratic through the three tabulated points.
        return (
            y0 * (t_c - t1) * (t_c - t2) / ((t0 - t1) * (t0 - t2))
            + y1 * (t_c - t0) * (t_c - t2) / ((t1 - t0) * (t1 - t2))
            + y2 * (t_c - t0) * (t_c - t1) / ((t2 - t0) * (t2 - t1))
        )

    @property
    def reference_molarity_mol_l(self) -> float:
        """The molarity at 20 °C of the tabulated reference strength, mol/L (c = m·ρ/(1 + m·M)), or 0."""
        if not self.excess_points or self.reference_molality_mol_kg <= 0:
            return 0.0
        m = self.reference_molality_mol_kg
        rho_kg_l = (water_density(REFERENCE_TEMPERATURE_C) + self.excess_density(REFERENCE_TEMPERATURE_C)) / 1000.0
        return m * rho_kg_l / (1.0 + m * self.solute_molar_mass_g_mol / 1000.0)


# Water's density alone, at every strength: for titrants whose own expansion has not been looked up.
WATER_LIKE = ExpansionModel(
    "water",
    source="density of pure water, Tanaka et al., Metrologia 38 (2001) 301; the solute's own expansion is not modelled",
)

# Densities of 1.0 mol/kg solutions at 10, 25 and 40 °C, g/cm3: HCl 1.01767, 1.01420, 1.00908; NaOH 1.04340,
# 1.03911, 1.03323 (advancedthermo.com electrolyte density tables, "Density of hydrochloric acid, HCl(aq)"
# and "Density of sodium hydroxide, NaOH(aq)", Table 1, consistent with IAPWS-95 water). The excess over
# Tanaka's water at the same temperatures (999.703, 997.047, 992.215 kg/m3) is stored.
AQUEOUS_HCL = ExpansionModel(
    "aqueous HCl",
    excess_points=((10.0, 1017.67 - 999.703), (25.0, 1014.20 - 997.047), (40.0, 1009.08 - 992.215)),
    reference_molality_mol_kg=1.0,
    solute_molar_mass_g_mol=36.46,
    source="water (Tanaka et al. 2001) plus the excess density of 1.0 mol/kg HCl(aq) at 10/25/40 °C "
    "(advancedthermo.com HCl(aq) density table), scaled with molarity",
)
AQUEOUS_NAOH = ExpansionModel(
    "aqueous NaOH",
    excess_points=((10.0, 1043.40 - 999.703), (25.0, 1039.11 - 997.047), (40.0, 1033.23 - 992.215)),
    reference_molality_mol_kg=1.0,
    solute_molar_mass_g_mol=40.00,
    source="water (Tanaka et al. 2001) plus the excess density of 1.0 mol/kg NaOH(aq) at 10/25/40 °C "
    "(advancedthermo.com NaOH(aq) density table), scaled with molarity",
)

# Perchloric acid in anhydrous (glacial) acetic acid, the usual titrant of non-aqueous acidimetry. The
# British Pharmacopoeia's monograph of the volumetric solution (BP 2012, Appendix I B, "Perchloric Acid VS")
# corrects a volume used at t2 after standardization at t1 by VC = V[1 + 0.0011(t1 − t2)]: the medium
# expands by 0.0011 per °C, about five times water's 2.1e-4. Taken as a constant cubic expansion
# coefficient about 20 °C; to first order the BP's correction and this model's 20 °C referral agree.
ACETIC_ACID_HCLO4 = ExpansionModel(
    "acetic acid medium",
    kind="linear",
    alpha_per_k=0.0011,
    source="BP 2012 Appendix I B, Perchloric Acid VS: VC = V[1 + 0.0011(t1 − t2)]",
)


def solution_density(model: ExpansionModel, c_mol_l: float, t_c: float) -> float:
    """Density of a titrant of strength c_mol_l at t_c by its model, kg/m3 (a relative scale for "linear").

    model: the titrant's ExpansionModel; c_mol_l: its molarity, mol/L (selects dilute or not); t_c: °C
    (0–40 for aqueous models). Returns kg/m3; for a "linear" model 1000·[1 − α(t − 20)], whose ratios
    are what matter.
    """
    c = _number("c_mol_l", c_mol_l)
    t = _number("t_c", t_c)
    if model.kind == "linear":
        return 1000.0 * (1.0 - model.alpha_per_k * (t - REFERENCE_TEMPERATURE_C))
    rho = water_density(t)
    c_ref = model.reference_molarity_mol_l
    if c > model.dilute_limit_mol_l and c_ref > 0:
        rho += (c / c_ref) * model.excess_density(t)
    return rho


def referral_factor(model: ExpansionModel, c_mol_l: float, t_c: float) -> float:
    """Factor taking a molarity measured at t_c to 20 °C, ρ(20 °C)/ρ(t) (dimensionless).

    model: the titrant's ExpansionModel; c_mol_l: its molarity, mol/L; t_c: °C. The amount of solute
    in a given mass of solution does not change with temperature, so molarity follows density.
    """
    return solution_density(model, c_mol_l, REFERENCE_TEMPERATURE_C) / solution_density(model, c_mol_l, t_c)


def molarity_at(model: ExpansionModel, c20_mol_l: float, t_c: float) -> float:
    """The molarity at t_c of a titrant certified c20_mol_l at 20 °C, c20·ρ(t)/ρ(20 °C), mol/L.

    model: the titrant's ExpansionModel; c20_mol_l: mol/L at 20 °C; t_c: °C.
    """
    c = _number("c20_mol_l", c20_mol_l)
    return c / referral_factor(model, c, t_c)


def expansion_coefficient(model: ExpansionModel, c_mol_l: float, t_c: float) -> float:
    """Cubic expansion coefficient of the titrant at t_c, α = −(1/ρ)·dρ/dt, 1/K.

    model: the titrant's ExpansionModel; c_mol_l: mol/L; t_c: °C. The derivative is a central
    difference over ±0.05 K (both density formulas are smooth; the step error is below 1e-10 /K).
    Pure water gives 2.07e-4 /K at 20 °C, 0.88e-4 at 10 °C and 3.0e-4 at 30 °C.
    """
    if model.kind == "linear":
        return model.alpha_per_k / (1.0 - model.alpha_per_k * (_number("t_c", t_c) - REFERENCE_TEMPERATURE_C))
    t = _number("t_c", t_c)
    h = 0.05
    lo, hi = max(0.0, t - h), min(40.0, t + h)
    rho = solution_density(model, c_mol_l, t)
    return -(solution_density(model, c_mol_l, hi) - solution_density(model, c_mol_l, lo)) / (hi - lo) / rho
