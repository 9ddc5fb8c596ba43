"""Standardization of a titrant: replicate molarities, run statistics, checks and the certified value's uncertainty.

Pure module: frozen dataclasses in and out; no web or database import. The measurement model and
every equation are written out in docs/measurement-model.md; in short:

* primary, per replicate: c_i = 1000·m_i·P·ν / (M·(V_i − b_i)), m_i the buoyancy-corrected mass
  (mass by difference or direct), then referred to 20 °C when the titration temperature is given;
* secondary, per replicate: c_i = c_ref·ν·V_titre,i / V_aliquot,i (aliquot of the new batch titrated
  with the reference) or c_ref·ν·V_aliquot,i / V_titre,i (aliquot of the reference titrated with the
  new batch);
* certified value: the mean of the included replicates, with a GUM budget of the product model
  c = K·m*·P·M⁻¹·V*⁻¹·R written at "effective" mass m* and volume V*, chosen so that the product
  model gives exactly the mean and its sensitivity coefficients equal those of the mean of the
  replicates (see _effective), cross-checked by Monte Carlo.

A flagged outlier is never dropped: excluding a replicate is an explicit Exclusion with a reason,
and an excluded replicate stays in the result, marked.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

from stockroom import chemistry, corrections, glassware, settings, stats
from stockroom.errors import FieldError, InvalidInput, StockroomError
from stockroom.uncertainty import (
    Z95,
    Factor,
    GumResult,
    InputQuantity,
    MonteCarloResult,
    ProductModel,
    Term,
    combine,
    factor,
    monte_carlo,
    u_resolution,
)

UNIT = "mol/L"

# A titre below this fraction of the burette's capacity reads too imprecisely (USP <31>, the
# pharmacopoeial rule for volumetric apparatus in titrimetry).
LOW_TITRE_FRACTION = 0.30
# Strength within ±10 % of the stated nominal (Ph. Eur./BP general text on volumetric solutions).
NOMINAL_WARN_REL = 0.10
# An answer off by this factor or more is a wrong standard, unit or dilution, not chemistry
# (common practice), and is refused rather than warned about.
NOMINAL_REFUSE_FACTOR = 3.0
# A ratio within this factor of a power of ten is read as a decade slip (common practice).
_DECADE_TOLERANCE = 1.5
# Temperatures certified values are referred to (volumetric glassware is graduated at 20 °C).
REFERENCE_TEMPERATURE_C = corrections.REFERENCE_TEMPERATURE_C
# A result within ±10 % of twice or half the nominal is refused, not warned about: the usual causes are a
# carbonate titrated to its first end point and a diprotic titrant's normality read as molarity (common
# practice). The ±10 % band is the nominal-strength tolerance above.
NOMINAL_HALF_DOUBLE_BAND = 0.10
# Certified assays of acidimetric primary standards are stated on both sides of 100 % (e.g. KHP 99.95–100.05 %,
# common practice for certified reference materials); a purity up to this mass fraction is accepted.
PURITY_MAX = 1.001
# A purity above this reads as a percentage (99.95 for 0.9995), not as a slightly high mass fraction.
PURITY_PERCENT_FROM = 1.5
# How k is chosen: "effective-dof" (k = t_p(ν_eff), GUM G.4) or "fixed" (k = coverage_factor, for labs whose
# procedure fixes k = 2).
K_POLICIES = ("effective-dof", "fixed")
# Checks a person may override with a reason (code -> what it guards against).
OVERRIDABLE_CHECKS = {
    "replicate-unit-slip": "one replicate off from the others by a power of ten",
    "nominal-twice-or-half": "a result twice or half the nominal strength",
}
# How the titre's and the aliquot's temperature errors of a secondary run are treated: "shared" (one lab
# temperature acts on both volumes, one input with the combined sensitivity) or "independent" (two inputs, as
# QUAM:2012 A3 treats them).
TEMPERATURE_TERMS = ("shared", "independent")


# --------------------------------------------------------------------------- parameters


@dataclass(frozen=True)
class Instruments:
    """Instrument and laboratory figures the uncertainty budget uses.

    balance_readability_g: last digit of the balance, g (u = d/√12 per reading);
    balance_linearity_g: linearity half-width, g (rectangular, per weighing);
    burette_capacity_ml, burette_tolerance_ml: burette size and tolerance half-width, mL
    (triangular); pipette_tolerance_ml: aliquot pipette tolerance half-width, mL (triangular);
    lab_temperature_half_range_k: half-width of the lab temperature range, K;
    lab_temperature_distribution: "rectangular" (the default) or "normal" (the half-range is a
    95 % interval, as QUAM:2012 A2 states it); expansion_coefficient_per_k: α of the titrant, 1/K;
    coverage_factor: k (dimensionless); monte_carlo_draws: count; monte_carlo_seed: generator seed;
    endpoint_u_ml: standard uncertainty of locating an end point, mL (0 leaves it to the
    repeatability, as QUAM does); purity_tolerance_default: rectangular half-width (mass
    fraction) used when a purity comes with no uncertainty.
    """

    balance_readability_g: float
    balance_linearity_g: float
    burette_capacity_ml: float
    burette_tolerance_ml: float
    pipette_tolerance_ml: float
    lab_temperature_half_range_k: float
    expansion_coefficient_per_k: float
    coverage_factor: float
    monte_carlo_draws: int
    lab_temperature_distribution: str = "rectangular"
    monte_carlo_seed: int = 20_080_901
    endpoint_u_ml: float = 0.0
    # Smallest division a burette is read to, mL: two readings make a titre, so replicates that agree
    # to the reading cannot show a scatter below it (the repeatability floor below).
    burette_reading_ml: float = 0.01
    # ±0.05 %, the purity tolerance QUAM:2012 A2 takes for KHP from its supplier's certificate.
    purity_tolerance_default: float = 0.0005
    # Class of the glassware whose figures default from its capacity (glassware.py), "A" or "B".
    burette_class: str = "A"
    pipette_class: str = "A"
    # Nominal capacity the pipette tolerance above belongs to, mL; None when it is a figure for whatever
    # pipette is used. When set and the aliquots show another size, that size's figure is used instead.
    pipette_capacity_ml: float | None = None
    # k from the effective degrees of freedom at this coverage probability, or fixed (K_POLICIES).
    k_policy: str = "effective-dof"
    coverage_probability: float = 0.95
    # A secondary run's titre and aliquot temperature terms (TEMPERATURE_TERMS) when the run does not say.
    temperature_terms: str = "shared"

    @classmethod
    def from_settings(cls, config: Mapping[str, Any]) -> Instruments:
        """Fill from a settings mapping (keys as in stockroom.settings), defaults for missing keys.

        config: e.g. a Flask app.config or settings.resolve(). Returns Instruments.
        """
        defaults = {s.name: s.default for s in settings.SETTINGS}

        def get(name: str) -> Any:
            return config.get(name, defaults[name])

        burette_capacity = float(get("BURETTE_CAPACITY_ML"))
        burette_class = _setting_choice("BURETTE_CLASS", get("BURETTE_CLASS"), glassware.CLASSES, upper=True)
        pipette_capacity = float(get("PIPETTE_CAPACITY_ML"))
        pipette_class = _setting_choice("PIPETTE_CLASS", get("PIPETTE_CLASS"), glassware.CLASSES, upper=True)
        return cls(
            balance_readability_g=float(get("BALANCE_READABILITY_G")),
            balance_linearity_g=float(get("BALANCE_LINEARITY_G")),
            burette_capacity_ml=burette_capacity,
            burette_tolerance_ml=_setting_tolerance(get("BURETTE_TOLERANCE_ML"), "burette", burette_capacity, burette_class),
            pipette_tolerance_ml=_setting_tolerance(get("PIPETTE_TOLERANCE_ML"), "pipette", pipette_capacity, pipette_class),
            lab_temperature_half_range_k=float(get("LAB_TEMPERATURE_HALF_RANGE_K")),
            expansion_coefficient_per_k=float(get("EXPANSION_COEFFICIENT_PER_K")),
            coverage_factor=float(get("COVERAGE_FACTOR")),
            monte_carlo_draws=int(get("MONTE_CARLO_DRAWS")),
            burette_class=burette_class,
            pipette_class=pipette_class,
            pipette_capacity_ml=pipette_capacity,
            k_policy=_setting_choice("COVERAGE_K_POLICY", get("COVERAGE_K_POLICY"), K_POLICIES),
            coverage_probability=float(get("COVERAGE_PROBABILITY")),
            temperature_terms=_setting_choice(
                "SECONDARY_TEMPERATURE_TERMS", get("SECONDARY_TEMPERATURE_TERMS"), TEMPERATURE_TERMS
            ),
        )


def _setting_choice(name: str, value: Any, allowed: Sequence[str], upper: bool = False) -> str:
    """A text setting that must be one of `allowed`; a ValueError naming the setting otherwise."""
    text = str(value).strip()
    text = text.upper() if upper else text.lower()
    if text not in allowed:
        raise ValueError(f"setting {name} must be one of {', '.join(allowed)} (got {value!r})")
    return text


def _setting_tolerance(value: Any, kind: str, capacity_ml: float, accuracy_class: str) -> float:
    """A tolerance setting (± mL), or when empty the listed figure for the capacity (mL) and class."""
    if value is not None and str(value).strip() != "":
        return float(value)
    listed = glassware.lookup(kind, capacity_ml, accuracy_class)
    if listed is None:
        raise ValueError(
            f"no Class {accuracy_class} {kind} of {capacity_ml:g} mL is listed: set {kind.upper()}_TOLERANCE_ML "
            f"(listed capacities: {', '.join(f'{c:g}' for c in glassware.capacities(kind))} mL)"
        )
    return listed.mpe_ml


def acceptance_rule_from_settings(config: Mapping[str, Any]) -> stats.AcceptanceRule:
    """The default acceptance rule from settings DEFAULT_MIN_REPLICATES and DEFAULT_MAX_RSD.

    config: a settings mapping. Returns a stats.AcceptanceRule (min_n count, max_rsd fraction).
    """
    defaults = {s.name: s.default for s in settings.SETTINGS}
    return stats.AcceptanceRule(
        min_n=int(config.get("DEFAULT_MIN_REPLICATES", defaults["DEFAULT_MIN_REPLICATES"])),
        max_rsd=float(config.get("DEFAULT_MAX_RSD", defaults["DEFAULT_MAX_RSD"])),
    )


@dataclass(frozen=True)
class StandardSpec:
    """What the model needs to know of a primary standard paired with a titrant.

    molar_mass_g_mol and u_molar_mass_g_mol in g/mol; nu: mol of titrant per mol of standard
    (dimensionless); density_g_cm3: for the buoyancy correction, g/cm3, or None.
    """

    key: str
    name: str
    molar_mass_g_mol: float
    u_molar_mass_g_mol: float
    nu: float
    density_g_cm3: float | None = None


def standard_spec(titrant_key: str, standard_key: str) -> StandardSpec:
    """StandardSpec from the chemistry catalogue (CIAAW 2021 molar mass, ν from the pair's reaction).

    titrant_key, standard_key: catalogue keys, aliases or formulas. Returns a StandardSpec.
    Raises chemistry.UnknownSubstance or chemistry.IncompatiblePair (both status 422).
    """
    from stockroom import chemistry

    t = chemistry.titrant(titrant_key)
    s = chemistry.standard(standard_key)
    nu = chemistry.stoichiometric_factor(t, s)
    mm = s.molar_mass
    return StandardSpec(
        key=s.key, name=s.name, molar_mass_g_mol=mm.value, u_molar_mass_g_mol=mm.u, nu=nu, density_g_cm3=s.density_g_cm3
    )


# --------------------------------------------------------------------------- run inputs


@dataclass(frozen=True)
class Replicate:
    """One titration of a weighed primary standard.

    Either mass_g (direct weighing) or gross_g and tare_g (mass by difference, gross − tare), all
    balance readings in air, g. volume_ml: titre delivered, mL; blank_ml: blank titre, mL;
    temperature_c: titrant temperature during the titration, °C, or None (taken as 20 °C);
    endpoint_u_ml: standard uncertainty of the end point located on this replicate's curve, mL, and
    endpoint_method the method that located it (stockroom.endpoints), or None when no curve was given.
    """

    volume_ml: float
    mass_g: float | None = None
    gross_g: float | None = None
    tare_g: float | None = None
    blank_ml: float = 0.0
    temperature_c: float | None = None
    endpoint_u_ml: float | None = None
    endpoint_method: str | None = None

    @property
    def by_difference(self) -> bool:
        """True when the mass is gross − tare (two weighings)."""
        return self.mass_g is None

    @property
    def air_mass_g(self) -> float:
        """Mass of standard as the balance saw it (uncorrected for buoyancy), g."""
        if self.mass_g is not None:
            return self.mass_g
        assert self.gross_g is not None and self.tare_g is not None
        return self.gross_g - self.tare_g


@dataclass(frozen=True)
class AliquotReplicate:
    """One titration of a pipetted aliquot (secondary standardization).

    aliquot_ml: pipetted volume, mL; volume_ml: titre delivered by the burette, mL; blank_ml: blank
    titre, mL; temperature_c: °C or None; endpoint_u_ml, endpoint_method: as for Replicate.
    """

    aliquot_ml: float
    volume_ml: float
    blank_ml: float = 0.0
    temperature_c: float | None = None
    endpoint_u_ml: float | None = None
    endpoint_method: str | None = None


@dataclass(frozen=True)
class Exclusion:
    """A replicate the analyst chose to leave out: 0-based index into the run's replicates, and why."""

    index: int
    reason: str


@dataclass(frozen=True)
class PrimaryRun:
    """A run against a weighed primary standard.

    purity: an InputQuantity (mass fraction; from a certificate's U and k, or a rectangular
    tolerance), or None to use the instruments' default tolerance about `purity_value`.
    nominal_molarity: mol/L or None. u_mass_g: standard uncertainty of one mass, g, replacing the
    balance terms; u_volume_ml: of one titre, mL, replacing the burette and temperature terms;
    u_repeatability_rel: relative standard uncertainty of the repeatability of the certified value,
    replacing s/√n. alternatives: other standards the titrant pairs with, used only to name the
    likely one when the answer is refused as a wrong standard. titrant: the catalogue's Titrant, or
    None; when given, its expansion model refers molarities to 20 °C and sets the budget's temperature
    sensitivity, and its max_molarity caps a plausible result. overrides: check code (OVERRIDABLE_CHECKS)
    -> the reason a person gives for going ahead; the result records them.
    """

    standard: StandardSpec
    replicates: tuple[Replicate, ...]
    purity: InputQuantity | None = None
    purity_value: float = 1.0
    buoyancy: bool = True
    nominal_molarity: float | None = None
    exclusions: tuple[Exclusion, ...] = ()
    u_mass_g: float | None = None
    u_volume_ml: float | None = None
    u_repeatability_rel: float | None = None
    burette_capacity_ml: float | None = None
    alternatives: tuple[StandardSpec, ...] = ()
    titrant: chemistry.Titrant | None = None
    overrides: Mapping[str, str] = field(default_factory=dict)


@dataclass(frozen=True)
class Reference:
    """The certified titrant a secondary standardization is made against: molarity and u, mol/L (at 20 °C).

    expansion: the reference titrant's expansion model, or None (then it expands as the new titrant does).
    """

    molarity: float
    u: float
    name: str = "reference titrant"
    expansion: corrections.ExpansionModel | None = None


@dataclass(frozen=True)
class SecondaryRun:
    """A run against a certified titrant batch.

    nu: mol of the new titrant per mol of the reference titrant (chemistry.stoichiometric_factor);
    aliquot_of: "new" (an aliquot of the new batch titrated with the reference from the burette, as
    QUAM:2012 A3) or "reference" (an aliquot of the reference titrated with the new batch).
    u_aliquot_ml replaces the pipette terms, u_volume_ml the burette and temperature terms.
    titrant and overrides as for PrimaryRun (titrant: the new batch's). temperature_terms: "shared"
    (one lab temperature acting on both volumes) or "independent" (QUAM:2012 A3), or None for the
    instruments' choice (Instruments.temperature_terms).
    """

    reference: Reference
    nu: float
    replicates: tuple[AliquotReplicate, ...]
    aliquot_of: str = "new"
    nominal_molarity: float | None = None
    exclusions: tuple[Exclusion, ...] = ()
    u_aliquot_ml: float | None = None
    u_volume_ml: float | None = None
    u_repeatability_rel: float | None = None
    burette_capacity_ml: float | None = None
    titrant: chemistry.Titrant | None = None
    overrides: Mapping[str, str] = field(default_factory=dict)
    temperature_terms: str | None = None


# --------------------------------------------------------------------------- results


@dataclass(frozen=True)
class Check:
    """A check that refused the result (or would have, but for an override).

    code: one of OVERRIDABLE_CHECKS; replicate: 0-based index it concerns, or None for the whole run;
    message: what was found and its likely causes; override_reason: the reason given for going ahead,
    or None when the check stands (the result is then refused).
    """

    code: str
    replicate: int | None
    message: str
    override_reason: str | None = None

    @property
    def overridden(self) -> bool:
        """True when a person went ahead with a reason."""
        return self.override_reason is not None


@dataclass(frozen=True)
class ReplicateResult:
    """One replicate as computed.

    molarity: mol/L at 20 °C; mass_g: buoyancy-corrected mass, g (primary) or None; titre_ml: net
    titre (less blank), mL; aliquot_ml: mL (secondary) or None; outlier: flagged by a screen of the
    whole run; outlier_tests names the tests that flagged it; excluded and exclusion_reason as the
    analyst chose; warnings about this replicate; fills: burette fills the titre took (1 or 2).
    """

    index: int
    molarity: float
    mass_g: float | None
    titre_ml: float
    aliquot_ml: float | None
    outlier: bool
    outlier_tests: tuple[str, ...]
    excluded: bool
    exclusion_reason: str | None
    warnings: tuple[str, ...]
    fills: int = 1


@dataclass(frozen=True)
class StandardizationResult:
    """Everything a run yields: the certified value and how it was reached.

    molarity, u (combined standard uncertainty) and U = k·u in mol/L at 20 °C; n counts included
    replicates, n_total all of them; summary of the included molarities (stats.Summary, mol/L);
    screening: outlier tests on all replicates in entry order; gum: GUM budget; monte_carlo:
    the JCGM 101 cross-check; accepted, reasons (why not) and warnings (accepted or not);
    nominal_ratio: molarity / nominal, or None. nu_eff: effective degrees of freedom of u (GUM G.4,
    inf when every source is Type B); coverage: the coverage probability k was taken for from
    t(nu_eff), or None when k was fixed; checks: the overridable checks that fired (refused, or gone
    ahead with a recorded reason); overrides: every (code, reason) the run was given, as recorded.
    """

    kind: str
    molarity: float
    u: float
    U: float
    k: float
    n: int
    n_total: int
    summary: stats.Summary
    replicates: tuple[ReplicateResult, ...]
    screening: tuple[stats.OutlierResult, ...]
    gum: GumResult
    monte_carlo: MonteCarloResult
    accepted: bool
    reasons: tuple[str, ...]
    warnings: tuple[str, ...]
    nominal_ratio: float | None
    model: ProductModel = field(repr=False)
    nu_eff: float = math.inf
    coverage: float | None = None
    checks: tuple[Check, ...] = ()
    overrides: tuple[tuple[str, str], ...] = ()

    @property
    def u_rel(self) -> float:
        """u/molarity (dimensionless)."""
        return self.u / self.molarity


# --------------------------------------------------------------------------- validation helpers


def _path(index: int, name: str) -> str:
    return f"replicates[{index}].{name}"


def _finite(x: Any) -> bool:
    return isinstance(x, int | float) and not isinstance(x, bool) and math.isfinite(x)


def _check_positive(errors: list[FieldError], name: str, value: Any, unit: str) -> bool:
    if not _finite(value):
        errors.append(FieldError(name, "must be a number"))
        return False
    if value <= 0:
        errors.append(FieldError(name, f"must be greater than 0 {unit}".rstrip()))
        return False
    return True


def _check_optional_u(errors: list[FieldError], name: str, value: Any, unit: str) -> None:
    if value is not None and (not _finite(value) or value < 0):
        zero = f"0 {unit}" if unit else "0"
        errors.append(FieldError(name, f"must be a standard uncertainty of {zero} or more"))


def _check_exclusions(errors: list[FieldError], exclusions: Sequence[Exclusion], n: int) -> set[int]:
    seen: set[int] = set()
    for j, ex in enumerate(exclusions):
        if not isinstance(ex.index, int) or isinstance(ex.index, bool) or not 0 <= ex.index < n:
            errors.append(FieldError(f"exclusions[{j}].index", f"must be the position of a replicate, 0 to {n - 1}"))
            continue
        if ex.index in seen:
            errors.append(FieldError(f"exclusions[{j}].index", f"replicates[{ex.index}] is already excluded"))
        if not isinstance(ex.reason, str) or not ex.reason.strip():
            errors.append(FieldError(f"exclusions[{j}].reason", "give the reason for leaving this replicate out"))
        seen.add(ex.index)
    if n and len(seen) >= n:
        errors.append(FieldError("exclusions", "at least one replicate must stay in the run"))
    return seen


def _net_titre(errors: list[FieldError], i: int, volume: float, blank: float) -> float | None:
    try:
        return corrections.net_titre(volume, blank)
    except StockroomError as exc:
        errors.append(FieldError(_path(i, "blank_ml"), exc.message))
        return None


def _temperature_factor(
    t_c: float | None, alpha: float, model: corrections.ExpansionModel | None = None, strength_mol_l: float = 0.1
) -> float:
    """Factor taking a molarity measured at t_c to 20 °C (1 when no temperature was recorded).

    With an expansion model, ρ(20 °C)/ρ(t) of a solution of strength_mol_l (mol/L); without, the
    linear [1 + α(t − 20)] with alpha in 1/K.
    """
    if t_c is None:
        return 1.0
    if model is not None:
        return corrections.referral_factor(model, strength_mol_l, t_c)
    return corrections.molarity_at_temperature(1.0, t_c, REFERENCE_TEMPERATURE_C, alpha)


def _run_temperature(temperatures: Sequence[float | None]) -> float:
    """The temperature the budget's sensitivity is taken at: the mean of those recorded, else 20 °C."""
    recorded = [t for t in temperatures if t is not None]
    return math.fsum(recorded) / len(recorded) if recorded else REFERENCE_TEMPERATURE_C


def _alpha(instruments: Instruments, model: corrections.ExpansionModel | None, strength_mol_l: float, t_c: float) -> float:
    """Expansion coefficient for the budget, 1/K: the model's −(1/ρ)dρ/dt at t_c, else the instruments' α."""
    if model is None:
        return instruments.expansion_coefficient_per_k
    return corrections.expansion_coefficient(model, strength_mol_l, t_c)


def _check_temperature(errors: list[FieldError], i: int, t_c: float | None) -> None:
    if t_c is not None and (not _finite(t_c) or not 5.0 <= t_c <= 40.0):
        errors.append(FieldError(_path(i, "temperature_c"), "must be between 5 and 40 °C"))


# --------------------------------------------------------------------------- shared pieces


def _effective(values: Sequence[float], quantities: Sequence[float]) -> float:
    """The x* with c̄/x* = mean(c_i/x_i): the value at which a product model matches the mean.

    values: replicate molarities c_i, mol/L; quantities: the replicates' x_i (masses g or volumes
    mL). For c̄ = mean(c_i) with c_i ∝ x_i^±1 and one error δ shared by every x_i,
    ∂c̄/∂δ = ±mean(c_i/x_i) = ±c̄/x*, so a source of u(δ) written on x* carries exactly the
    sensitivity it has in the mean of the replicates. Equal replicates give x* = x.
    """
    c_bar = math.fsum(values) / len(values)
    return c_bar / (math.fsum(c / x for c, x in zip(values, quantities, strict=True)) / len(values))


def _u_lab_temperature(instruments: Instruments) -> tuple[float, str]:
    """Standard uncertainty of the lab temperature's departure from 20 °C, K, and how it was reached."""
    a = instruments.lab_temperature_half_range_k
    if instruments.lab_temperature_distribution == "normal":
        return a / Z95, f"lab within ±{a:g} K at 95 %, u = a/1.96"
    return a / math.sqrt(3), f"lab within ±{a:g} K, rectangular, u = a/√3"


def _temperature_source(volume_ml: float, instruments: Instruments, what: str, alpha: float | None = None) -> InputQuantity:
    a = instruments.lab_temperature_half_range_k
    alpha = instruments.expansion_coefficient_per_k if alpha is None else alpha
    half = volume_ml * alpha * a
    if instruments.lab_temperature_distribution == "normal":
        return InputQuantity.normal(
            f"{what} temperature",
            0.0,
            half / Z95,
            "mL",
            f"lab within ±{a:g} K at 95 %: {volume_ml:.4g} mL × {alpha:g}/K × {a:g} K / 1.96",
        )
    return InputQuantity.rectangular(
        f"{what} temperature",
        0.0,
        half,
        "mL",
        f"lab within ±{a:g} K, rectangular: {volume_ml:.4g} mL × {alpha:g}/K × {a:g} K / √3",
    )


def _located(
    replicates: Sequence[Replicate | AliquotReplicate],
    included: Sequence[int],
    molarities: Sequence[float],
    titres_ml: Sequence[float],
    v_star_ml: float,
) -> list[tuple[float, str] | None]:
    """(weighted u in mL, method) of each included replicate's located end point, None where it has no curve.

    A replicate's end-point error δ_i moves the mean by c_i / (n T_i) · δ_i (c ∝ T^±1); the titre factor
    carries the sensitivity c̄ / V*, so u_i enters weighted by w_i = c_i V* / (c̄ T_i) (1 for equal replicates).
    molarities: mol/L of every replicate; titres_ml: each one's effective titre (mL); v_star_ml: mL.
    """
    c_bar = math.fsum(molarities[i] for i in included) / len(included)
    out: list[tuple[float, str] | None] = []
    for i in included:
        r = replicates[i]
        if r.endpoint_u_ml is None:
            out.append(None)
            continue
        w = molarities[i] * v_star_ml / (c_bar * titres_ml[i])
        out.append((abs(w) * float(r.endpoint_u_ml), r.endpoint_method or "derivative"))
    return out


def _titre_terms(
    titre: float,
    blanks: Sequence[float],
    instruments: Instruments,
    u_volume_ml: float | None,
    *,
    burette_tolerance_ml: float | None = None,
    alpha: float | None = None,
    temperature: bool = True,
    second_fill_share: float = 0.0,
    located: Sequence[tuple[float, str] | None] = (),
) -> list[InputQuantity | Term]:
    """The titre volume and its error sources (burette, temperature, end point, blank).

    burette_tolerance_ml: ± mL of the burette used (default the instruments'); alpha: 1/K for the
    temperature term (default the instruments'); temperature: False when a shared temperature input
    carries it instead; second_fill_share: fraction of the included replicates whose titre took a second
    fill of the burette, whose own calibration error enters with that weight; located: for each included
    replicate, (u in mL weighted by its sensitivity, see _located; method) of the end point located on its
    curve, or None when it has no curve. When any has one, the located figures replace the stated
    end-point u: the mean titre's end-point error is u = √(Σ (w_i u_i)²) / n over the n included
    replicates (independent locations, GUM 5.1.2; a replicate without a curve adds none).
    """
    tol = instruments.burette_tolerance_ml if burette_tolerance_ml is None else burette_tolerance_ml
    terms: list[InputQuantity | Term] = [
        InputQuantity.normal("titre volume", titre, 0.0, "mL", "mean effective titre of the run")
    ]
    if u_volume_ml is not None:
        terms.append(
            InputQuantity.normal("titre volume (stated u)", 0.0, u_volume_ml, "mL", "stated standard uncertainty of one titre")
        )
    else:
        terms.append(
            InputQuantity.triangular(
                "burette calibration", 0.0, tol, "mL", f"burette tolerance ±{tol:g} mL, triangular, u = a/√6"
            )
        )
        if second_fill_share > 0:
            terms.append(
                Term(
                    InputQuantity.triangular(
                        "burette calibration (second fill)",
                        0.0,
                        tol,
                        "mL",
                        f"a second delivery, its own tolerance ±{tol:g} mL, triangular, in "
                        f"{second_fill_share * 100:.0f} % of the replicates",
                    ),
                    second_fill_share,
                )
            )
        if temperature:
            terms.append(_temperature_source(titre, instruments, "titre", alpha))
    curves = [c for c in located if c is not None]
    if curves:
        n = len(located)
        u_ep = math.sqrt(math.fsum(u * u for u, _ in curves)) / n
        methods = sorted({m for _, m in curves})
        words = " and ".join(f"{m} method" for m in methods)
        share = "every replicate" if len(curves) == n else f"{len(curves)} of the {n} included replicates"
        terms.append(
            InputQuantity.normal(
                "end point (located)",
                0.0,
                u_ep,
                "mL",
                f"located from the curve, {words}: √(Σu²)/n over {share}, each u weighted by its replicate's "
                f"sensitivity ({u_ep:.2g} mL)",
            )
        )
    elif instruments.endpoint_u_ml > 0:
        terms.append(
            InputQuantity.normal(
                "end point", 0.0, instruments.endpoint_u_ml, "mL", "stated standard uncertainty of locating the end point"
            )
        )
    mean_blank = math.fsum(blanks) / len(blanks) if blanks else 0.0
    if mean_blank > 0:
        # The blank correction b is known to lie between 0 and 2b: rectangular of half-width b.
        terms.append(
            Term(
                InputQuantity.rectangular(
                    "blank",
                    0.0,
                    mean_blank,
                    "mL",
                    f"blank correction {mean_blank:.3g} mL known within ±{mean_blank:.3g} mL, rectangular",
                ),
                -1.0,
            )
        )
    return terms


def _repeatability(
    summary: stats.Summary, stated: float | None, rule: stats.AcceptanceRule, warnings: list[str], floor_rel: float = 0.0
) -> InputQuantity:
    """Repeatability factor R = 1 with u = s/(c̄·√n), or a stated relative u.

    floor_rel: the relative u below which an observed s/√n is not believed (readings quantized to the
    burette's division can agree exactly); an observed value under it is raised to it, with a note.
    """
    n = summary.n
    observed = (summary.sd / math.sqrt(n) / abs(summary.mean)) if summary.sd is not None and n >= 2 else None
    if stated is None and observed is not None and n >= 3 and observed < floor_rel:
        return InputQuantity.normal(
            "repeatability",
            1.0,
            floor_rel,
            "",
            f"s/√n of the {n} replicates ({observed:.2g}) is below what two burette "
            f"readings can resolve; the floor (d·√2/√12)/V̄/√n for a burette division d is used",
        )
    if stated is not None:
        if observed is not None and n >= 3 and observed > stated:
            warnings.append(
                f"the stated repeatability ({stated:.2g} relative) is below this run's own "
                f"s/√n ({observed:.2g}); the stated figure is used as asked"
            )
        return InputQuantity.normal("repeatability", 1.0, stated, "", "stated relative standard uncertainty of repeatability")
    if observed is not None and n >= 3:
        return InputQuantity.normal(
            "repeatability", 1.0, observed, "", f"s/√n of the {n} included replicates, relative to their mean", dof=n - 1
        )
    fallback = rule.max_rsd / math.sqrt(n)
    if observed is not None and observed > fallback:
        # Two replicates that disagree by more than the acceptance limit allows: the stand-in would
        # claim a repeatability better than the scatter seen, so the scatter itself is used.
        warnings.append(
            f"with {n} replicates the repeatability is taken from their own scatter (s/√n {observed:.2g} "
            f"relative), which exceeds the acceptance limit's RSD {rule.max_rsd * 100:g} % /√{n}"
        )
        return InputQuantity.normal(
            "repeatability",
            1.0,
            observed,
            "",
            f"s/√n of the {n} replicates ({observed:.2g}), above the acceptance-limit stand-in ({fallback:.2g})",
            dof=n - 1,
        )
    warnings.append(
        f"with {n} replicate{'s' if n != 1 else ''} the repeatability cannot be estimated; "
        f"the acceptance limit RSD {rule.max_rsd * 100:g} % /√{n} stands in for it — "
        f"give u_repeatability_rel for a stated figure"
    )
    return InputQuantity.normal(
        "repeatability",
        1.0,
        fallback,
        "",
        f"acceptance limit RSD {rule.max_rsd:g} divided by √{n} (no estimate from {n} replicate{'s' if n != 1 else ''})",
    )


def _screen(values: Sequence[float]) -> tuple[list[stats.OutlierResult], dict[int, list[str]]]:
    results = stats.screen(values)
    flags: dict[int, list[str]] = {}
    for r in results:
        if r.applicable and r.outlier and r.index is not None:
            flags.setdefault(r.index, []).append(r.test)
    return results, flags


def _decade(ratio: float) -> int:
    """The power of ten a ratio sits near (within _DECADE_TOLERANCE), or 0."""
    if not ratio > 0:
        return 0
    d = math.log10(ratio)
    k = round(d)
    return k if k != 0 and abs(d - k) <= math.log10(_DECADE_TOLERANCE) else 0


def _median(values: Sequence[float]) -> float:
    v = sorted(values)
    n = len(v)
    return v[n // 2] if n % 2 else (v[n // 2 - 1] + v[n // 2]) / 2


def _unit_hint(what: str, unit: str, k: int) -> str:
    """The likely slip behind an entry off by 10^k (common practice)."""
    if unit == "g" and k == 3:
        return f"the {what} typed in mg as if in g"
    if unit == "mL" and k == 3:
        return f"the {what} typed in µL as if in mL"
    if unit == "mL" and k == -3:
        return f"the {what} typed in L as if in mL"
    places = abs(k)
    return f"the decimal point of the {what} {places} place{'s' if places > 1 else ''} off"


def replicate_slips(
    molarities: Sequence[float], included: Sequence[int], entries: Sequence[Mapping[str, tuple[float, str]]]
) -> list[Check]:
    """Replicates whose molarity is off from the others' median by a power of ten, with the likely entry.

    molarities: every replicate's molarity, mol/L; included: indices not excluded; entries: per
    replicate, name -> (value, unit) of the entries the molarity rests on (e.g. "mass": (0.51, "g"),
    "titre": (24.9, "mL")). Returns one Check ("replicate-unit-slip") per slipped replicate naming it
    (1-based in the message) and the entry that is off by the same power of ten, with its likely unit.
    """
    out: list[Check] = []
    if len(included) < 2:
        return out
    for i in included:
        others = [j for j in included if j != i]
        k = _decade(molarities[i] / _median([molarities[j] for j in others]))
        if k == 0:
            continue
        named = []
        for name, (value, unit) in entries[i].items():
            ref = _median([entries[j][name][0] for j in others])
            kk = _decade(value / ref) if ref > 0 else 0
            if kk != 0:
                named.append(f"{name} {value:g} {unit} against {ref:g} {unit} in the others: {_unit_hint(name, unit, kk)}")
        cause = "; ".join(named) if named else "check the units and decimal point of each of its entries"
        out.append(
            Check(
                "replicate-unit-slip",
                i,
                f"replicate {i + 1} gives {molarities[i]:.5g} mol/L, {10 ** abs(k):g} times "
                f"{'more' if k > 0 else 'less'} than the others ({_median([molarities[j] for j in others]):.5g} mol/L): "
                f"{cause}",
            )
        )
    return out


def _half_double_check(molarity: float, nominal: float | None) -> Check | None:
    """A Check when the result is within ±10 % of twice or half the nominal strength."""
    if nominal is None:
        return None
    ratio = molarity / nominal
    said = f"{molarity:.5g} mol/L is {ratio:.3g} times the nominal {nominal:g} mol/L"
    if abs(ratio / 2.0 - 1.0) <= NOMINAL_HALF_DOUBLE_BAND:
        return Check(
            "nominal-twice-or-half",
            None,
            f"{said}: twice the nominal is what a carbonate standard titrated only to its first end point gives "
            f"(CO3²⁻ → HCO3⁻ takes half the acid), or a monoprotic standard entered as a diprotic one",
        )
    if abs(ratio * 2.0 - 1.0) <= NOMINAL_HALF_DOUBLE_BAND:
        return Check(
            "nominal-twice-or-half",
            None,
            f"{said}: half the nominal is what a diprotic titrant labelled by its normality gives when read as "
            f"molarity (0.1 N H2SO4 or Ba(OH)2 is 0.05 mol/L), or a carbonate counted as taking one proton",
        )
    return None


def _ceiling_reason(molarity: float, titrant: chemistry.Titrant | None) -> str | None:
    """A reason when a result is stronger than any solution of the titrant can be."""
    if titrant is None or not molarity > titrant.max_molarity:
        return None
    k = _decade(molarity / 0.1)
    slip = (
        "a mass typed in mg as if in g, or a titre in L as if in mL (each a factor of 1000)"
        if k >= 3
        else "a decimal-point slip in a mass or a titre, or a nominal or dilution entered wrongly"
    )
    return (
        f"{molarity:.5g} mol/L is stronger than any {titrant.name} solution can be (at most "
        f"{titrant.max_molarity:g} mol/L: {titrant.max_molarity_source}); the likely cause is {slip}"
    )


def _check_overrides(errors: list[FieldError], overrides: Mapping[str, str]) -> None:
    if not isinstance(overrides, Mapping):
        errors.append(FieldError("overrides", "must map a check code to the reason for going ahead"))
        return
    for code, reason in overrides.items():
        if code not in OVERRIDABLE_CHECKS:
            codes = ", ".join(OVERRIDABLE_CHECKS)
            errors.append(FieldError(f"overrides[{code}]", f"is not a check that can be overridden ({codes})"))
        elif not isinstance(reason, str) or not reason.strip():
            errors.append(FieldError(f"overrides[{code}]", "give the reason for going ahead despite this check"))


def _nominal_check(
    molarity: float, nominal: float | None, reasons: list[str], warnings: list[str], alt_hint: str | None
) -> float | None:
    """Compare with the nominal strength: warn beyond ±10 %, refuse a factor of 3 or more."""
    if nominal is None:
        return None
    ratio = molarity / nominal
    factor_off = max(ratio, 1.0 / ratio)
    if _half_double_check(molarity, nominal) is not None:
        return ratio  # refused (or overridden) by the twice-or-half check, which names the causes
    if factor_off >= NOMINAL_REFUSE_FACTOR:
        decade = math.log10(ratio)
        k = round(decade)
        near_decade = k != 0 and abs(decade - k) <= math.log10(_DECADE_TOLERANCE)
        said = f"{molarity:.5g} mol/L is {ratio:.3g} times the nominal {nominal:g} mol/L"
        if near_decade and abs(k) == 3:
            cause = (
                "a factor of 1000 is a unit slip: a mass entered in mg as g, a volume in L as mL, or a nominal in mmol/L as mol/L"
            )
        elif near_decade:
            cause = (
                f"a factor of {10 ** abs(k):g} is a dilution or decimal-point slip: check the "
                f"nominal strength, the dilution made and the decimal point of each entry"
            )
        else:
            cause = "not a power of ten, so the likely cause is a wrong standard (or titrant) for the entries"
            if alt_hint:
                cause += f"; {alt_hint}"
        reasons.append(f"{said}: {cause}")
    elif abs(ratio - 1.0) > NOMINAL_WARN_REL:
        warnings.append(
            f"{molarity:.5g} mol/L is {(ratio - 1) * 100:+.1f} % from the nominal {nominal:g} "
            f"mol/L, beyond ±{NOMINAL_WARN_REL * 100:g} %"
        )
    return ratio


def _low_titre_warning(titre: float, capacity: float) -> str | None:
    if titre > capacity:
        return (
            f"titre {titre:.2f} mL is beyond the {capacity:g} mL burette: counted as two fills, each with "
            f"its own calibration and reading terms"
        )
    if titre < LOW_TITRE_FRACTION * capacity:
        return (
            f"titre {titre:.2f} mL is under {LOW_TITRE_FRACTION * 100:g} % of the {capacity:g} mL "
            f"burette (USP <31>): take more standard or a smaller burette"
        )
    return None


def _matching_constant(c_bar: float, factors: Sequence[Factor]) -> float:
    """K with K·Π X_i^e_i = c̄: the exact numbers (1000, ν, buoyancy and 20 °C factors, the
    effective-quantity ratios) lumped so that the product model returns the mean exactly."""
    prod = 1.0
    for f in factors:
        prod *= f.value**f.exponent
    return c_bar / prod


def _finish(
    kind: str,
    molarities: list[float],
    included: list[int],
    excluded: dict[int, str],
    per_rep: list[dict[str, Any]],
    model_factors: list[Factor],
    nominal: float | None,
    instruments: Instruments,
    rule: stats.AcceptanceRule,
    stated_rep: float | None,
    warnings: list[str],
    alt_hint_for: Any,
    *,
    titrant: chemistry.Titrant | None = None,
    overrides: Mapping[str, str] | None = None,
    slips: Sequence[Check] = (),
    readings_per_titre: int = 2,
) -> StandardizationResult:
    """Statistics, model, GUM, Monte Carlo and verdict shared by both kinds of run."""
    inc_values = [molarities[i] for i in included]
    summary = stats.summarize(inc_values)
    screening, flags = _screen(molarities)
    for i, tests in sorted(flags.items()):
        if i not in excluded:
            warnings.append(
                f"replicate {i + 1} is flagged as an outlier ({', '.join(tests)}); it stays in "
                f"the run unless you exclude it with a reason"
            )
    reasons: list[str] = []
    titres = [per_rep[i]["titre_ml"] for i in included]
    floor_rel = 0.0
    if titres:
        # Two readings per titre, four when the titre took two fills.
        reading_u = instruments.burette_reading_ml / math.sqrt(12) * math.sqrt(readings_per_titre)
        floor_rel = reading_u / (sum(titres) / len(titres)) / math.sqrt(len(titres))
    R = _repeatability(summary, stated_rep, rule, warnings, floor_rel)
    factors = [*model_factors, factor("repeatability", 1, R)]
    constant = _matching_constant(summary.mean, factors)
    model = ProductModel(constant, tuple(factors), UNIT, "c")
    fixed = instruments.k_policy == "fixed"
    gum = combine(model, instruments.coverage_factor if fixed else None, instruments.coverage_probability)
    if not fixed and math.isfinite(gum.nu_eff):
        warnings.append(
            f"k = {gum.k:.3g} from t at {instruments.coverage_probability * 100:g} % with ν_eff = {gum.nu_eff:.1f} "
            f"(Welch-Satterthwaite, GUM G.4)"
        )
    mc = monte_carlo(model, instruments.monte_carlo_draws, instruments.monte_carlo_seed)
    verdict = stats.judge(summary, rule)
    reasons.extend(verdict.reasons)
    given = dict(overrides or {})
    checks: list[Check] = list(slips)
    half_double = _half_double_check(summary.mean, nominal) if not slips else None
    if half_double is not None:
        checks.append(half_double)
    checks = [dataclasses.replace(c, override_reason=given[c.code].strip()) if c.code in given else c for c in checks]
    for c in checks:
        if c.overridden:
            warnings.append(f"{c.message} — gone ahead: {c.override_reason}")
        else:
            reasons.append(f"{c.message} (to go ahead, override '{c.code}' with a reason)")
    ceiling = _ceiling_reason(summary.mean, titrant)
    if ceiling is not None:
        reasons.append(ceiling)
    if slips or ceiling is not None:
        # A slipped entry or an impossible strength explains any distance from the nominal; the nominal
        # check's wrong-standard hint would mislead.
        ratio = summary.mean / nominal if nominal else None
    else:
        ratio = _nominal_check(summary.mean, nominal, reasons, warnings, alt_hint_for(summary.mean, nominal) if nominal else None)
    replicates = tuple(
        ReplicateResult(
            index=i,
            molarity=molarities[i],
            mass_g=per_rep[i].get("mass_g"),
            titre_ml=per_rep[i]["titre_ml"],
            aliquot_ml=per_rep[i].get("aliquot_ml"),
            outlier=i in flags,
            outlier_tests=tuple(flags.get(i, ())),
            excluded=i in excluded,
            exclusion_reason=excluded.get(i),
            warnings=tuple(per_rep[i]["warnings"]),
            fills=per_rep[i].get("fills", 1),
        )
        for i in range(len(molarities))
    )
    for r in replicates:
        warnings.extend(f"replicate {r.index + 1}: {w}" for w in r.warnings)
    return StandardizationResult(
        kind=kind,
        molarity=summary.mean,
        u=gum.u,
        U=gum.U,
        k=gum.k,
        n=summary.n,
        n_total=len(molarities),
        summary=summary,
        replicates=replicates,
        screening=tuple(screening),
        gum=gum,
        monte_carlo=mc,
        accepted=not reasons,
        reasons=tuple(reasons),
        warnings=tuple(warnings),
        nominal_ratio=ratio,
        model=model,
        nu_eff=gum.nu_eff,
        coverage=gum.coverage,
        checks=tuple(checks),
        overrides=tuple((code, reason.strip()) for code, reason in given.items()),
    )


# --------------------------------------------------------------------------- primary


def primary_replicate_molarity(
    rep: Replicate,
    spec: StandardSpec,
    purity: float,
    buoyancy: bool,
    alpha_per_k: float,
    expansion: corrections.ExpansionModel | None = None,
    strength_mol_l: float | None = None,
) -> tuple[float, float, float]:
    """c = 1000·m·P·ν/(M·(V − V_blank)) for one replicate, referred to 20 °C.

    rep: the replicate (g, mL, °C); spec: the standard; purity: mass fraction; buoyancy: correct
    the mass to vacuum; alpha_per_k: 1/K, used when expansion is None; expansion: the titrant's
    model, referring by ρ(20 °C)/ρ(t) of a solution of strength_mol_l (mol/L; default this
    replicate's own molarity). Returns (molarity mol/L at 20 °C, true mass g, net titre mL).
    """
    m = rep.air_mass_g
    if buoyancy and spec.density_g_cm3:
        m = corrections.true_mass(m, spec.density_g_cm3)
    titre = corrections.net_titre(rep.volume_ml, rep.blank_ml)
    c = 1000.0 * m * purity * spec.nu / (spec.molar_mass_g_mol * titre)
    strength = strength_mol_l if strength_mol_l is not None else c
    return c * _temperature_factor(rep.temperature_c, alpha_per_k, expansion, strength), m, titre


def _purity_quantity(run: PrimaryRun, instruments: Instruments, warnings: list[str]) -> InputQuantity:
    if run.purity is not None:
        q = run.purity
        return InputQuantity(f"purity of {run.standard.key}", q.value, q.u, "", q.distribution, q.derivation)
    a = instruments.purity_tolerance_default
    warnings.append(f"no purity uncertainty was given; ±{a:g} (rectangular) is assumed")
    return InputQuantity.rectangular(
        f"purity of {run.standard.key}", run.purity_value, a, "", f"assumed tolerance ±{a:g}, rectangular (none given)"
    )


def _validate_primary(run: PrimaryRun) -> None:
    errors: list[FieldError] = []
    if not run.replicates:
        errors.append(FieldError("replicates", "give at least one replicate"))
    purity = run.purity.value if run.purity is not None else run.purity_value
    if not _finite(purity) or purity <= 0:
        errors.append(FieldError("purity", f"must be a mass fraction greater than 0 and at most {PURITY_MAX:g}"))
    elif purity > PURITY_PERCENT_FROM:
        errors.append(FieldError("purity", f"is a mass fraction, not a percentage: write {purity:g} % as {purity / 100:g}"))
    elif purity > PURITY_MAX:
        errors.append(
            FieldError(
                "purity",
                f"must be at most {PURITY_MAX:g}: a certified assay may read slightly above 1 (e.g. 1.0003), but not {purity:g}",
            )
        )
    for i, rep in enumerate(run.replicates):
        if rep.mass_g is not None:
            if rep.gross_g is not None or rep.tare_g is not None:
                errors.append(FieldError(_path(i, "mass_g"), "give mass_g, or gross_g and tare_g, not both"))
            _check_positive(errors, _path(i, "mass_g"), rep.mass_g, "g")
        elif rep.gross_g is None or rep.tare_g is None:
            errors.append(FieldError(_path(i, "mass_g"), "is required (or gross_g and tare_g)"))
        else:
            gross_ok = _check_positive(errors, _path(i, "gross_g"), rep.gross_g, "g")
            tare_ok = _finite(rep.tare_g) and rep.tare_g >= 0
            if not tare_ok:
                errors.append(FieldError(_path(i, "tare_g"), "must be at least 0 g"))
            if gross_ok and tare_ok and rep.gross_g <= rep.tare_g:
                errors.append(FieldError(_path(i, "gross_g"), "must be greater than tare_g (mass by difference)"))
        if _check_positive(errors, _path(i, "volume_ml"), rep.volume_ml, "mL"):
            if not _finite(rep.blank_ml) or rep.blank_ml < 0:
                errors.append(FieldError(_path(i, "blank_ml"), "must be at least 0 mL"))
            else:
                _net_titre(errors, i, rep.volume_ml, rep.blank_ml)
        _check_temperature(errors, i, rep.temperature_c)
    spec = run.standard
    if not _finite(spec.molar_mass_g_mol) or spec.molar_mass_g_mol <= 0:
        errors.append(FieldError("standard", "molar mass must be greater than 0 g/mol"))
    if not _finite(spec.nu) or spec.nu <= 0:
        errors.append(FieldError("standard", "stoichiometric factor must be greater than 0"))
    if run.nominal_molarity is not None:
        _check_positive(errors, "nominal_molarity", run.nominal_molarity, "mol/L")
    _check_optional_u(errors, "u_mass_g", run.u_mass_g, "g")
    _check_optional_u(errors, "u_volume_ml", run.u_volume_ml, "mL")
    _check_optional_u(errors, "u_repeatability_rel", run.u_repeatability_rel, "")
    if run.burette_capacity_ml is not None:
        _check_positive(errors, "burette_capacity_ml", run.burette_capacity_ml, "mL")
    _check_exclusions(errors, run.exclusions, len(run.replicates))
    _check_overrides(errors, run.overrides)
    _check_fills(errors, [r.volume_ml - r.blank_ml for r in run.replicates], run.burette_capacity_ml)
    if errors:
        raise InvalidInput(errors)


def _check_fills(errors: list[FieldError], titres: Sequence[Any], capacity: float | None) -> None:
    """Refuse titres of more than two burette fills (only when the run states its burette's capacity here;
    the instruments' capacity is checked in the computation)."""
    if capacity is None or not _finite(capacity) or capacity <= 0:
        return
    for i, t in enumerate(titres):
        if _finite(t) and t > 0:
            try:
                glassware.burette_fills(t, capacity)
            except InvalidInput as exc:
                errors.append(FieldError(_path(i, "volume_ml"), exc.errors[0].message))


def _fills(titre: float, capacity: float, index: int) -> int:
    try:
        return glassware.burette_fills(titre, capacity)
    except InvalidInput as exc:
        raise InvalidInput([FieldError(_path(index, "volume_ml"), exc.errors[0].message)]) from exc


def _burette_tolerance(run_capacity: float | None, instruments: Instruments, warnings: list[str]) -> float:
    """± mL of the burette used: the instruments' figure, or the listed figure for the capacity the run names."""
    if run_capacity is None or run_capacity == instruments.burette_capacity_ml:
        return instruments.burette_tolerance_ml
    t = glassware.lookup("burette", run_capacity, instruments.burette_class)
    if t is None:
        warnings.append(
            f"no tolerance is listed for a {run_capacity:g} mL burette; the instruments' ±"
            f"{instruments.burette_tolerance_ml:g} mL is used"
        )
        return instruments.burette_tolerance_ml
    return t.mpe_ml


def _pipette_tolerance(aliquots: Sequence[float], instruments: Instruments) -> tuple[float, str]:
    """± mL of the pipette used and how it was chosen: the instruments' figure, or the listed one for the
    aliquots' nominal size when that differs from the size the instruments' figure belongs to."""
    own = instruments.pipette_tolerance_ml
    cap = instruments.pipette_capacity_ml
    if cap is None or not aliquots:
        return own, f"pipette tolerance ±{own:g} mL"
    size = _median(aliquots)
    listed = [c for c in glassware.capacities("pipette") if abs(size / c - 1) <= 0.01]
    if not listed or listed[0] == cap:
        return own, f"pipette tolerance ±{own:g} mL"
    t = glassware.tolerance("pipette", listed[0], instruments.pipette_class)
    return t.mpe_ml, f"{listed[0]:g} mL pipette, {t.source}: ±{t.mpe_ml:g} mL"


def _alternative_hint(run: PrimaryRun) -> Any:
    def hint(molarity: float, nominal: float) -> str | None:
        # Same masses and titres read as another standard: c scales with ν/M.
        own = run.standard.nu / run.standard.molar_mass_g_mol
        fits = [
            alt
            for alt in run.alternatives
            if alt.key != run.standard.key
            and abs(molarity * (alt.nu / alt.molar_mass_g_mol) / own / nominal - 1) <= NOMINAL_WARN_REL
        ]
        if not fits:
            return None
        names = " or ".join(f"{a.name} ({a.key})" for a in fits)
        return f"the entries fit {names} rather than {run.standard.name} ({run.standard.key})"

    return hint


def standardize_primary(
    run: PrimaryRun, instruments: Instruments, rule: stats.AcceptanceRule | None = None
) -> StandardizationResult:
    """Compute a primary standardization run: replicates, statistics, checks, GUM and Monte Carlo.

    run: the PrimaryRun (g, mL, °C, mass fractions); instruments: Instruments; rule: acceptance
    rule (default n >= 3, RSD <= 0.2 %). Returns a StandardizationResult in mol/L at 20 °C.
    Raises InvalidInput naming each bad field (replicates[i].mass_g ...).
    """
    rule = rule or stats.AcceptanceRule()
    _validate_primary(run)
    warnings: list[str] = []
    spec = run.standard
    purity_q = _purity_quantity(run, instruments, warnings)
    if run.buoyancy and not spec.density_g_cm3:
        warnings.append(f"no density is known for {spec.name}; masses are not corrected for air buoyancy")
    alpha = instruments.expansion_coefficient_per_k
    expansion = run.titrant.expansion if run.titrant is not None else None
    capacity = run.burette_capacity_ml or instruments.burette_capacity_ml
    tolerance = _burette_tolerance(run.burette_capacity_ml, instruments, warnings)
    excluded = {ex.index: ex.reason.strip() for ex in run.exclusions}
    molarities: list[float] = []
    per_rep: list[dict[str, Any]] = []
    for i, rep in enumerate(run.replicates):
        # The model's strength: the nominal, else this replicate's own molarity (the model's dependence on
        # strength is slow, so either is close enough).
        c, m, titre = primary_replicate_molarity(rep, spec, purity_q.value, run.buoyancy, alpha, expansion, run.nominal_molarity)
        molarities.append(c)
        low = _low_titre_warning(titre, capacity)
        per_rep.append(
            {
                "mass_g": m,
                "air_mass_g": rep.air_mass_g,
                "titre_ml": titre,
                "warnings": [low] if low else [],
                "fills": _fills(titre, capacity, i),
            }
        )
    included = [i for i in range(len(molarities)) if i not in excluded]
    inc_c = [molarities[i] for i in included]
    # The balance errors act on the readings, so m* is an effective balance reading; the buoyancy
    # factor, like 1000 and ν, goes into the constant K.
    m_star = _effective(inc_c, [per_rep[i]["air_mass_g"] for i in included])
    v_star = _effective(inc_c, [per_rep[i]["titre_ml"] for i in included])
    blanks = [run.replicates[i].blank_ml for i in included]
    strength = run.nominal_molarity or (math.fsum(inc_c) / len(inc_c))
    t_run = _run_temperature([run.replicates[i].temperature_c for i in included])
    budget_alpha = _alpha(instruments, expansion, strength, t_run)
    two_fill_share = sum(1 for i in included if per_rep[i]["fills"] > 1) / len(included)

    # Mass: one shared error per reading, so the balance terms enter once for the run (see docs).
    mass_terms: list[InputQuantity | Term] = [
        InputQuantity.normal("mass", m_star, 0.0, "g", "effective balance reading of the run")
    ]
    if run.u_mass_g is not None:
        mass_terms.append(
            InputQuantity.normal("mass (stated u)", 0.0, run.u_mass_g, "g", "stated standard uncertainty of one mass")
        )
    else:
        weighings = ("gross", "tare") if any(run.replicates[i].by_difference for i in included) else ("single",)
        lin, d = instruments.balance_linearity_g, instruments.balance_readability_g
        for w in weighings:
            if lin > 0:
                mass_terms.append(
                    Term(
                        InputQuantity.rectangular(
                            f"balance linearity ({w} weighing)",
                            0.0,
                            lin,
                            "g",
                            f"linearity ±{lin * 1000:g} mg, rectangular, u = a/√3",
                        ),
                        1.0 if w != "tare" else -1.0,
                    )
                )
            if d > 0:
                mass_terms.append(
                    Term(
                        InputQuantity.rectangular(
                            f"balance readability ({w} weighing)",
                            0.0,
                            d / 2,
                            "g",
                            f"readability {d * 1000:g} mg, u = d/√12 ({u_resolution(d) * 1000:.3g} mg)",
                        ),
                        1.0 if w != "tare" else -1.0,
                    )
                )
    model_factors = [
        factor("mass", 1, *mass_terms, unit="g"),
        factor("purity", 1, purity_q),
        factor(
            "molar mass",
            -1,
            InputQuantity.normal(
                f"molar mass of {spec.key}",
                spec.molar_mass_g_mol,
                spec.u_molar_mass_g_mol,
                "g/mol",
                "from the atomic weights' uncertainties",
            ),
            unit="g/mol",
        ),
        factor(
            "titre volume",
            -1,
            *_titre_terms(
                v_star,
                blanks,
                instruments,
                run.u_volume_ml,
                burette_tolerance_ml=tolerance,
                alpha=budget_alpha,
                second_fill_share=two_fill_share,
                located=_located(run.replicates, included, molarities, [p["titre_ml"] for p in per_rep], v_star),
            ),
            unit="mL",
        ),
    ]
    slips = replicate_slips(
        molarities,
        included,
        [{"mass": (per_rep[i]["air_mass_g"], "g"), "titre": (per_rep[i]["titre_ml"], "mL")} for i in range(len(molarities))],
    )

    return _finish(
        "primary",
        molarities,
        included,
        excluded,
        per_rep,
        model_factors,
        run.nominal_molarity,
        instruments,
        rule,
        run.u_repeatability_rel,
        warnings,
        _alternative_hint(run),
        titrant=run.titrant,
        overrides=run.overrides,
        slips=slips,
        readings_per_titre=4 if two_fill_share > 0 else 2,
    )


# --------------------------------------------------------------------------- secondary


def secondary_replicate_molarity(
    rep: AliquotReplicate,
    reference: Reference,
    nu: float,
    aliquot_of: str,
    expansion: corrections.ExpansionModel | None = None,
) -> tuple[float, float]:
    """c_x = c_ref·ν·V_titre/V_aliquot (aliquot of the new batch) or c_ref·ν·V_aliquot/V_titre.

    rep: the replicate (mL); reference: mol/L at 20 °C; nu: dimensionless; aliquot_of: "new" or
    "reference"; expansion: the new titrant's model, or None. Returns (molarity mol/L at 20 °C, net
    titre mL). Both solutions are measured at the same temperature, so the 20 °C referral cancels
    when they expand alike; when their models differ (a 1 mol/L NaOH against a 0.1 mol/L HCl), the
    difference is applied: c_x(20) = c_x(t)·[ρ_x(20)/ρ_x(t)]/[ρ_ref(20)/ρ_ref(t)].
    """
    titre = corrections.net_titre(rep.volume_ml, rep.blank_ml)
    if aliquot_of == "new":
        c = reference.molarity * nu * titre / rep.aliquot_ml
    else:
        c = reference.molarity * nu * rep.aliquot_ml / titre
    ref_model = reference.expansion or expansion
    if rep.temperature_c is not None and expansion is not None and ref_model is not None and ref_model != expansion:
        c *= corrections.referral_factor(expansion, c, rep.temperature_c) / corrections.referral_factor(
            ref_model, reference.molarity, rep.temperature_c
        )
    return c, titre


def _validate_secondary(run: SecondaryRun) -> None:
    errors: list[FieldError] = []
    if not run.replicates:
        errors.append(FieldError("replicates", "give at least one replicate"))
    if run.aliquot_of not in ("new", "reference"):
        errors.append(FieldError("aliquot_of", "must be 'new' or 'reference'"))
    _check_positive(errors, "reference.molarity", run.reference.molarity, "mol/L")
    _check_optional_u(errors, "reference.u", run.reference.u, "mol/L")
    if run.reference.u is None:
        errors.append(FieldError("reference.u", "is required: the certified titrant's standard uncertainty"))
    if not _finite(run.nu) or run.nu <= 0:
        errors.append(FieldError("reference", "stoichiometric factor must be greater than 0"))
    for i, rep in enumerate(run.replicates):
        _check_positive(errors, _path(i, "aliquot_ml"), rep.aliquot_ml, "mL")
        if _check_positive(errors, _path(i, "volume_ml"), rep.volume_ml, "mL"):
            if not _finite(rep.blank_ml) or rep.blank_ml < 0:
                errors.append(FieldError(_path(i, "blank_ml"), "must be at least 0 mL"))
            else:
                _net_titre(errors, i, rep.volume_ml, rep.blank_ml)
        _check_temperature(errors, i, rep.temperature_c)
    if run.nominal_molarity is not None:
        _check_positive(errors, "nominal_molarity", run.nominal_molarity, "mol/L")
    _check_optional_u(errors, "u_aliquot_ml", run.u_aliquot_ml, "mL")
    _check_optional_u(errors, "u_volume_ml", run.u_volume_ml, "mL")
    _check_optional_u(errors, "u_repeatability_rel", run.u_repeatability_rel, "")
    if run.burette_capacity_ml is not None:
        _check_positive(errors, "burette_capacity_ml", run.burette_capacity_ml, "mL")
    _check_exclusions(errors, run.exclusions, len(run.replicates))
    _check_overrides(errors, run.overrides)
    if run.temperature_terms is not None and run.temperature_terms not in TEMPERATURE_TERMS:
        errors.append(FieldError("temperature_terms", f"must be one of {', '.join(TEMPERATURE_TERMS)}"))
    _check_fills(errors, [r.volume_ml - r.blank_ml for r in run.replicates], run.burette_capacity_ml)
    if errors:
        raise InvalidInput(errors)


def _shared_temperature(instruments: Instruments, alpha_ref: float, alpha_new: float, e_titre: int) -> InputQuantity | Term:
    """One lab-temperature input acting on both volumes of a secondary run, with their combined sensitivity.

    The reference's volume (titre when aliquot_of is "new", aliquot otherwise) grows by α_ref·δT and the new
    batch's by α_new·δT, and c_x ∝ V_ref/V_new either way, so c_x changes by (α_ref − α_new)·δT: one input
    δT (K) with coefficient (α_ref − α_new) in a factor of value 1. e_titre only says which volume is which
    in the derivation.
    """
    u_t, how = _u_lab_temperature(instruments)
    s = alpha_ref - alpha_new
    which = "titre (reference) and aliquot (new batch)" if e_titre == 1 else "aliquot (reference) and titre (new batch)"
    return Term(
        InputQuantity.normal(
            "lab temperature (shared by titre and aliquot)",
            0.0,
            u_t,
            "K",
            f"{how}; one temperature acts on the {which}: combined sensitivity α_ref − α_new = "
            f"{alpha_ref:.3g} − {alpha_new:.3g} /K",
        ),
        s,
    )


def standardize_secondary(
    run: SecondaryRun, instruments: Instruments, rule: stats.AcceptanceRule | None = None
) -> StandardizationResult:
    """Compute a secondary standardization against a certified titrant, carrying u(c_ref).

    run: the SecondaryRun (mL, mol/L); instruments: Instruments; rule: acceptance rule. Returns a
    StandardizationResult in mol/L at 20 °C. The reference's full u (its own repeatability
    included) enters as one source, and this run's repeatability as another.
    """
    rule = rule or stats.AcceptanceRule()
    _validate_secondary(run)
    warnings: list[str] = []
    capacity = run.burette_capacity_ml or instruments.burette_capacity_ml
    tolerance = _burette_tolerance(run.burette_capacity_ml, instruments, warnings)
    expansion = run.titrant.expansion if run.titrant is not None else None
    excluded = {ex.index: ex.reason.strip() for ex in run.exclusions}
    molarities: list[float] = []
    per_rep: list[dict[str, Any]] = []
    for i, rep in enumerate(run.replicates):
        c, titre = secondary_replicate_molarity(rep, run.reference, run.nu, run.aliquot_of, expansion)
        molarities.append(c)
        low = _low_titre_warning(titre, capacity)
        per_rep.append(
            {
                "titre_ml": titre,
                "aliquot_ml": rep.aliquot_ml,
                "warnings": [low] if low else [],
                "fills": _fills(titre, capacity, i),
            }
        )
    included = [i for i in range(len(molarities)) if i not in excluded]
    inc_c = [molarities[i] for i in included]
    t_star = _effective(inc_c, [per_rep[i]["titre_ml"] for i in included])
    a_star = _effective(inc_c, [per_rep[i]["aliquot_ml"] for i in included])
    blanks = [run.replicates[i].blank_ml for i in included]
    strength = run.nominal_molarity or (math.fsum(inc_c) / len(inc_c))
    t_run = _run_temperature([run.replicates[i].temperature_c for i in included])
    alpha_new = _alpha(instruments, expansion, strength, t_run)
    ref_model = run.reference.expansion or expansion
    alpha_ref = _alpha(instruments, ref_model, run.reference.molarity, t_run)
    # With a stated u for either volume, that u already holds its temperature effect: both stay independent.
    terms = run.temperature_terms or instruments.temperature_terms
    shared = terms == "shared" and run.u_volume_ml is None and run.u_aliquot_ml is None
    e_titre = 1 if run.aliquot_of == "new" else -1
    # Which solution each volume holds: the burette delivers the reference when the aliquot is of the new batch.
    alpha_titre, alpha_aliquot = (alpha_ref, alpha_new) if e_titre == 1 else (alpha_new, alpha_ref)
    two_fill_share = sum(1 for i in included if per_rep[i]["fills"] > 1) / len(included)
    aliquot_terms: list[InputQuantity | Term] = [
        InputQuantity.normal("aliquot volume", a_star, 0.0, "mL", "effective aliquot of the run")
    ]
    if run.u_aliquot_ml is not None:
        aliquot_terms.append(
            InputQuantity.normal("aliquot (stated u)", 0.0, run.u_aliquot_ml, "mL", "stated standard uncertainty of one aliquot")
        )
    else:
        tol, which = _pipette_tolerance([per_rep[i]["aliquot_ml"] for i in included], instruments)
        aliquot_terms.append(InputQuantity.triangular("pipette calibration", 0.0, tol, "mL", f"{which}, triangular, u = a/√6"))
        if not shared:
            aliquot_terms.append(_temperature_source(a_star, instruments, "aliquot", alpha_aliquot))
    ref = run.reference
    model_factors = [
        factor(
            "reference molarity",
            1,
            InputQuantity.normal(
                ref.name,
                ref.molarity,
                ref.u,
                UNIT,
                "certified value of the reference and its standard uncertainty (its own repeatability included)",
            ),
        ),
        factor(
            "titre volume",
            e_titre,
            *_titre_terms(
                t_star,
                blanks,
                instruments,
                run.u_volume_ml,
                burette_tolerance_ml=tolerance,
                alpha=alpha_titre,
                temperature=not shared,
                second_fill_share=two_fill_share,
                located=_located(run.replicates, included, molarities, [p["titre_ml"] for p in per_rep], t_star),
            ),
            unit="mL",
        ),
        factor("aliquot volume", -e_titre, *aliquot_terms, unit="mL"),
    ]
    if shared:
        model_factors.append(
            factor(
                "temperature",
                1,
                InputQuantity.normal("temperature factor", 1.0, 0.0, "", "exactly 1 at the reference temperature"),
                _shared_temperature(instruments, alpha_ref, alpha_new, e_titre),
                unit="",
            )
        )
    slips = replicate_slips(
        molarities,
        included,
        [{"titre": (per_rep[i]["titre_ml"], "mL"), "aliquot": (per_rep[i]["aliquot_ml"], "mL")} for i in range(len(molarities))],
    )

    return _finish(
        "secondary",
        molarities,
        included,
        excluded,
        per_rep,
        model_factors,
        run.nominal_molarity,
        instruments,
        rule,
        run.u_repeatability_rel,
        warnings,
        lambda c, nominal: None,
        titrant=run.titrant,
        overrides=run.overrides,
        slips=slips,
        readings_per_titre=4 if two_fill_share > 0 else 2,
    )


# --------------------------------------------------------------------------- serialization


def _f(x: float | None) -> float | None:
    """A float for JSON: None for missing or non-finite (JSON has no NaN)."""
    if x is None or not math.isfinite(x):
        return None
    return float(x)


def result_as_dict(result: StandardizationResult, extra: dict[str, Any] | None = None) -> dict[str, Any]:
    """A JSON-ready dict of a result: the preview API's body and the snapshot stored with a run.

    Numbers in mol/L, mL, g; shares as fractions; non-finite numbers become None.
    """
    s = result.summary
    gum = result.gum
    lines_by_factor: dict[str, list[Any]] = {}
    for line in gum.lines:
        lines_by_factor.setdefault(line.factor, []).append(line)
    budget = [
        {
            "source": f.name,
            "value": _f(f.value),
            "u": _f(f.u),
            "unit": f.unit,
            "u_rel": _f(f.u_rel),
            "contribution": _f(f.contribution),
            "contribution_rel": _f(f.contribution_rel),
            "share": _f(f.share),
            "components": [
                {
                    "source": ln.source,
                    "dof": _f(ln.dof),
                    "u": _f(ln.u),
                    "unit": ln.unit,
                    "u_rel": _f(ln.u_rel),
                    "distribution": ln.distribution,
                    "derivation": ln.derivation,
                    "share": _f(ln.share),
                }
                for ln in lines_by_factor.get(f.name, [])
                if ln.u > 0
            ],
        }
        for f in gum.factors
    ]
    mc = result.monte_carlo
    body: dict[str, Any] = {
        "kind": result.kind,
        **(extra or {}),
        "unit": "mol/L",
        "reference_temperature_c": REFERENCE_TEMPERATURE_C,
        "molarity": _f(result.molarity),
        "u": _f(result.u),
        "u_rel": _f(result.u_rel),
        "U": _f(result.U),
        "k": _f(result.k),
        # None when infinite (every source Type B): JSON has no infinity.
        "nu_eff": _f(result.nu_eff),
        "coverage": _f(result.coverage),
        "n": result.n,
        "n_total": result.n_total,
        "sd": _f(s.sd),
        "rsd": _f(s.rsd),
        "ci95": [_f(s.ci_low), _f(s.ci_high)] if s.ci_low is not None else [None, None],
        "replicates": [
            {
                "index": r.index,
                "molarity": _f(r.molarity),
                "outlier": r.outlier,
                "outlier_tests": list(r.outlier_tests),
                "excluded": r.excluded,
                "exclusion_reason": r.exclusion_reason,
                "mass_g": _f(r.mass_g),
                "titre_ml": _f(r.titre_ml),
                "aliquot_ml": _f(r.aliquot_ml),
                "warnings": list(r.warnings),
                "fills": r.fills,
            }
            for r in result.replicates
        ],
        "screening": [
            {
                "test": o.test,
                "applicable": o.applicable,
                "index": o.index,
                "statistic": _f(o.statistic),
                "critical": _f(o.critical),
                "outlier": o.outlier,
                "note": o.note,
                "verdict": o.verdict,
                "ratio": o.ratio,
            }
            for o in result.screening
        ],
        "budget": budget,
        "monte_carlo": {
            "u": _f(mc.u),
            "mean": _f(mc.mean),
            "interval95": [_f(mc.low), _f(mc.high)],
            "draws": mc.draws,
            "seed": mc.seed,
        },
        "nominal_ratio": _f(result.nominal_ratio),
        "accepted": result.accepted,
        "reasons": list(result.reasons),
        "warnings": list(result.warnings),
        "checks": [
            {"code": c.code, "replicate": c.replicate, "message": c.message, "override_reason": c.override_reason}
            for c in result.checks
        ],
        "overrides": {code: reason for code, reason in result.overrides},
    }
    return body
