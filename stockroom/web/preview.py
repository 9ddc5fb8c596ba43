"""POST /api/v1/standardizations/preview: compute a standardization run without storing it.

The run form's live preview calls this. Every bad input is a 422 with
{"errors": [{"field", "message"}]} naming the request path of each bad field; a body that is not
JSON is a 400 and one that is not a JSON object a 422, in the same shape. Instrument defaults come
from the app config (the setting names in stockroom.settings).
"""

from __future__ import annotations

from typing import Any

from flask import Blueprint, current_app, jsonify

from stockroom import chemistry, formatting, run_input, stats
from stockroom.errors import FieldError, InvalidInput, StockroomError
from stockroom.standardization import (
    AliquotReplicate,
    Exclusion,
    Instruments,
    PrimaryRun,
    Reference,
    Replicate,
    SecondaryRun,
    StandardizationResult,
    StandardSpec,
    acceptance_rule_from_settings,
    result_as_dict,
    standardize_primary,
    standardize_secondary,
)
from stockroom.uncertainty import InputQuantity
from stockroom.web import forms, read_json_body
from stockroom.web.access import anonymous_response, current_user, public
from stockroom.web.inputs import MISSING, Parser, field_path, number_problem

bp = Blueprint("preview", __name__)

URL_RULE = "/api/v1/standardizations/preview"
MAX_REPLICATES = run_input.LIMITS.max_replicates
# A preview may ask for more draws than the default, up to the 10^6 the benchmark times.
MAX_DRAWS = 1_000_000
MIN_DRAWS = 1_000
# Without signing in: at most 10^5 draws (the default setting) and a 64 KB body (a 50-replicate run
# is under 10 KB); signed in, the JSON reader's own 512 KB.
ANONYMOUS_MAX_DRAWS = 100_000
ANONYMOUS_MAX_BYTES = 64 * 1024
MAX_BODY_BYTES = 512 * 1024
# The replicates and the fields a run shares with the form (burette, temperatures, reasons) are
# read by stockroom.run_input under its one table of limits; these bound the preview's own
# standalone fields, well past any bench titration, so nonsense (1e300) stays out of the arithmetic.
MAX_MOLARITY = 20.0
MAX_U_MASS_G = 1.0
MAX_U_VOLUME_ML = 10.0
# A standard assaying under half its label is not a primary standard (common practice: they are
# >= 99.9 %); the floor only keeps absurd fractions out.
MIN_PURITY = 0.5
MIN_MOLARITY = 1e-6


# Figures of the instruments a run names (the register's), replacing the settings' defaults.
INSTRUMENT_KEYS = ("balance_readability_g", "balance_linearity_g", "burette_tolerance_ml", "pipette_tolerance_ml")
_COMMON_KEYS = {
    "titrant",
    "replicates",
    "u_volume_ml",
    "u_repeatability_rel",
    "nominal_molarity",
    "exclusions",
    "burette_capacity_ml",
    "temperature_c",
    "min_replicates",
    "max_rsd",
    "monte_carlo_draws",
    "overrides",
    "curve_reading",
    "curve_method",
    *INSTRUMENT_KEYS,
}
PRIMARY_KEYS = _COMMON_KEYS | {
    "standard",
    "purity",
    "u_purity",
    "purity_tolerance",
    "purity_U",
    "purity_k",
    "u_mass_g",
    "buoyancy",
    "molar_mass_g_mol",
    "u_molar_mass_g_mol",
    "dried_at_c",
}
SECONDARY_KEYS = _COMMON_KEYS | {"reference", "standard", "aliquot_of", "u_aliquot_ml"}
REFERENCE_KEYS = {"molarity", "u", "titrant"}


def _measurable(p: Parser, value: float | None, field: str, smallest: float, unit: str) -> float | None:
    """value, unless it is positive but below what can be measured (an error is then recorded)."""
    if value is not None and value < smallest:
        p.error(field, f"is too small to measure: must be at least {smallest:g} {unit}")
        return None
    return value


def _error_response(errors: list[FieldError], status: int) -> Any:
    return jsonify({"errors": [e.as_dict() for e in errors]}), status


@bp.post(URL_RULE)
@public
def preview() -> Any:
    # Storing nothing, a preview is a read in all but method: open to anonymous requests exactly
    # when OPEN_READS opens reads, otherwise it needs a signed-in user (the access gate lets only
    # `public` views take anonymous POSTs, so the rule is applied here).
    if not current_app.config.get("OPEN_READS", True) and current_user() is None:
        return anonymous_response()
    anonymous = current_user() is None
    # One JSON body reader for every JSON endpoint (content type, size, depth, characters); an
    # anonymous preview is held to a smaller body and fewer Monte Carlo draws, so that nobody can
    # make the server compute 10^6 draws per request without signing in.
    data = read_json_body(max_bytes=ANONYMOUS_MAX_BYTES if anonymous else MAX_BODY_BYTES)
    config = current_app.config
    try:
        draws = ANONYMOUS_MAX_DRAWS if anonymous else MAX_DRAWS
        result, extra = compute_preview(data, config, max_draws=draws, decimal_comma=forms.from_form_page())
    except InvalidInput as exc:
        return _error_response(exc.errors, 422)
    except StockroomError as exc:
        return _error_response([FieldError("_", exc.message)], 422)
    except (ArithmeticError, ValueError) as exc:
        # Only reachable with valid-looking numbers whose arithmetic still fails (e.g. overflow);
        # the answer stays a 422 naming the request as a whole rather than a 500.
        return _error_response([FieldError("_", f"these values cannot be computed: {exc}")], 422)
    body = result_as_dict(result, extra)
    body["display"] = display_strings(body)
    return jsonify(body)


def display_strings(body: dict[str, Any]) -> dict[str, Any]:
    """The result as the run form shows it, made by stockroom.formatting (the script only places it).

    body: result_as_dict's answer (molarity, sd, ci95, u in mol/L; rsd, u_rel, shares as fractions).
    The roundings are those of templates/runs/_result.html, so "Compute" and the live preview agree.
    """
    unit = "mol/L"
    sd, ci, u = body.get("sd"), body.get("ci95") or [None, None], body.get("u")
    mc = body.get("monte_carlo") or {}
    ci_text = formatting.DASH
    if ci[0] is not None:
        ci_text = f"{formatting.quantity(ci[0], '', 6).strip()} to {formatting.quantity(ci[1], unit, 6)}"
    return {
        "molarity": formatting.molarity(body.get("molarity"), body.get("U"), body.get("k")),
        "sd": "— (needs 2 or more)" if sd is None else formatting.quantity(sd, unit, 6),
        "rsd": formatting.percent(body.get("rsd"), 3),
        "ci95": ci_text,
        "u": f"{formatting.quantity(u, unit, 6)} ({formatting.percent(body.get('u_rel'), 3)})",
        # How k was chosen, with ν_eff (GUM G.4) or the laboratory's fixed k: as the result panel reads it.
        "k": formatting.coverage(body["k"]) if body.get("k") is not None else formatting.DASH,
        "nu_eff": "∞ (every source Type B)" if body.get("nu_eff") is None else f"{body['nu_eff']:.1f}",
        "coverage": formatting.coverage_basis(body.get("k"), body.get("nu_eff"), body.get("coverage")),
        "monte_carlo": f"u = {formatting.quantity(mc.get('u'), unit, 6)} from {int(mc.get('draws') or 0):,} draws",
        "replicates": [formatting.quantity(r.get("molarity"), unit, 5) for r in body.get("replicates", [])],
        "budget": [
            {"u_rel": formatting.percent(b.get("u_rel"), 4), "share": formatting.percent(b.get("share"), 1)}
            for b in body.get("budget", [])
        ],
    }


# --------------------------------------------------------------------------- request → run


def compute_preview(
    data: dict[str, Any], config: Any, *, max_draws: int = MAX_DRAWS, decimal_comma: bool = False
) -> tuple[StandardizationResult, dict[str, Any]]:
    """Parse a preview request and compute it.

    data: the decoded JSON object; config: settings mapping (app.config); max_draws: the most Monte
    Carlo draws this request may ask for (fewer for anonymous requests). Returns the result and
    the extra fields the response echoes (titrant, standard or reference). Raises InvalidInput.
    decimal_comma: True for the run form's own live preview (parsing.form_decimal), False for programs.
    """
    p = Parser(decimal_comma=decimal_comma)
    secondary = "reference" in data
    p.known_keys(data, SECONDARY_KEYS if secondary else PRIMARY_KEYS)
    instruments = Instruments.from_settings(config)
    draws = p.integer(data.get("monte_carlo_draws", MISSING), "monte_carlo_draws", required=False, ge=MIN_DRAWS, le=max_draws)
    if draws is not None:
        instruments = _replace(instruments, monte_carlo_draws=draws)
    elif instruments.monte_carlo_draws > max_draws:
        instruments = _replace(instruments, monte_carlo_draws=max_draws)
    figures = {}
    for key in INSTRUMENT_KEYS:
        value = p.number(data.get(key, MISSING), key, required=False, gt=0, le=10, unit="g" if key.endswith("_g") else "mL")
        if value is not None:
            figures[key] = value
    if figures:
        instruments = _replace(instruments, **figures)
    rule = _rule(p, data, config)
    titrant = _titrant(p, data.get("titrant", MISSING), "titrant")
    common: dict[str, Any] = {
        "nominal_molarity": _measurable(
            p,
            p.number(
                data.get("nominal_molarity", MISSING), "nominal_molarity", required=False, gt=0, le=MAX_MOLARITY, unit="mol/L"
            ),
            "nominal_molarity",
            MIN_MOLARITY,
            "mol/L",
        ),
        "u_volume_ml": p.number(
            data.get("u_volume_ml", MISSING), "u_volume_ml", required=False, ge=0, le=MAX_U_VOLUME_ML, unit="mL"
        ),
        "u_repeatability_rel": p.number(
            data.get("u_repeatability_rel", MISSING), "u_repeatability_rel", required=False, ge=0, lt=1
        ),
        "burette_capacity_ml": run_input.burette_capacity(p, data.get("burette_capacity_ml", MISSING), required=False),
        # Checks gone ahead despite, read as every door reads them (run_input.read_overrides).
        "overrides": run_input.read_overrides(p, data.get("overrides", MISSING)),
        # The titrant's expansion model refers volumes to 20 °C and its ceiling bounds a plausible result.
        "titrant": titrant,
    }
    # The replicates by the run parser every door uses (a titre may also be given as volume_ml here).
    reps_raw = data.get("replicates", MISSING)
    curve_reading, curve_method = run_input.read_curve_options(p, data)
    reps, excluded = run_input.read_replicates(
        p,
        reps_raw,
        "secondary" if secondary else "primary",
        capacity_ml=common["burette_capacity_ml"],
        run_temperature=run_input.temperature(p, data.get("temperature_c", MISSING), "temperature_c"),
        allow_volume=True,
        curve_reading=curve_reading,
        curve_method=curve_method,
    )
    n = len(reps_raw) if isinstance(reps_raw, list) else 0
    exclusions = _exclusions(p, data.get("exclusions", MISSING), n)
    exclusions += tuple(Exclusion(pos - 1, why) for pos, why in sorted(excluded.items()))
    if secondary:
        result, extra = _secondary(p, data, titrant, reps, exclusions, common, instruments, rule)
    else:
        result, extra = _primary(p, data, titrant, reps, exclusions, common, instruments, rule)
    return result, extra


def _replace(instruments: Instruments, **changes: Any) -> Instruments:
    from dataclasses import replace

    return replace(instruments, **changes)


def _rule(p: Parser, data: dict[str, Any], config: Any) -> stats.AcceptanceRule:
    default = acceptance_rule_from_settings(config)
    min_n = p.integer(data.get("min_replicates", MISSING), "min_replicates", required=False, ge=1, le=MAX_REPLICATES)
    max_rsd = p.number(data.get("max_rsd", MISSING), "max_rsd", required=False, gt=0, le=0.1)
    return stats.AcceptanceRule(
        min_n=min_n if min_n is not None else default.min_n, max_rsd=max_rsd if max_rsd is not None else default.max_rsd
    )


def _titrant(p: Parser, raw: Any, field: str) -> chemistry.Titrant | None:
    key = p.text(raw, field)
    if key is None:
        return None
    try:
        return chemistry.titrant(key)
    except StockroomError as exc:
        p.error(field, exc.message)
        return None


def _exclusions(p: Parser, raw: Any, n: int) -> tuple[Exclusion, ...]:
    items = p.array(raw, "exclusions", required=False, max_items=MAX_REPLICATES)
    out: list[Exclusion] = []
    for j, item in enumerate(items or ()):
        base = field_path("exclusions", j)
        obj = p.mapping(item, base)
        if obj is None:
            continue
        p.known_keys(obj, {"index", "reason"}, base)
        index = p.integer(obj.get("index", MISSING), field_path(base, "index"), ge=0, le=max(n - 1, 0))
        reason = p.text(obj.get("reason", MISSING), field_path(base, "reason"), max_length=run_input.LIMITS.max_reason)
        if index is not None and reason is not None:
            out.append(Exclusion(index, reason))
    return tuple(out)


def _primary_replicates(reps: list[run_input.ReplicateInput]) -> list[Replicate]:
    return [
        Replicate(
            volume_ml=r.volume_ml,
            mass_g=r.mass_g,
            gross_g=r.gross_g,
            tare_g=r.tare_g,
            blank_ml=r.blank_ml,
            temperature_c=r.temperature_c,
            endpoint_u_ml=r.curve.end_point.u_ml if r.curve else None,
            endpoint_method=r.curve.method if r.curve else None,
        )
        for r in reps
    ]


def _purity(p: Parser, data: dict[str, Any]) -> tuple[float | None, InputQuantity | None]:
    """The purity (mass fraction) and, when an uncertainty form was given, the InputQuantity."""
    raw = data.get("purity", MISSING)
    value = p.number(raw, "purity", gt=0, le=1)
    if value is None and p.has_error("purity"):
        given, _ = number_problem(raw)
        if given is not None and 1 < given <= 100:
            p.errors[-1] = FieldError(
                "purity", "must be greater than 0 and at most 1: a mass fraction, so write 0.9995 for 99.95 %"
            )
    elif value is not None and value < MIN_PURITY:
        p.error("purity", f"must be at least {MIN_PURITY:g}: a primary standard is nearly pure (a mass fraction such as 0.9995)")
        value = None
    return value, _purity_quantity(p, data, value)


def _purity_quantity(p: Parser, data: dict[str, Any], value: float | None) -> InputQuantity | None:
    forms = [k for k in ("u_purity", "purity_tolerance", "purity_U") if k in data]
    if len(forms) > 1:
        p.error(forms[1], f"give one of u_purity, purity_tolerance or purity_U with purity_k, not {' and '.join(forms)}")
        return None
    if "purity_k" in data and "purity_U" not in data:
        p.error("purity_k", "goes with purity_U (the certificate's expanded uncertainty)")
    if value is None:
        return None
    if "u_purity" in data:
        u = p.number(data["u_purity"], "u_purity", ge=0, lt=1)
        return None if u is None else InputQuantity.normal("purity", value, u, "", "stated standard uncertainty")
    if "purity_tolerance" in data:
        a = p.number(data["purity_tolerance"], "purity_tolerance", ge=0, lt=1)
        return None if a is None else InputQuantity.rectangular("purity", value, a)
    if "purity_U" in data:
        big_u = p.number(data["purity_U"], "purity_U", ge=0, lt=1)
        k = p.number(data.get("purity_k", MISSING), "purity_k", gt=0, le=10)
        if big_u is None or k is None:
            return None
        return InputQuantity.expanded("purity", value, big_u, k)
    return None


def _primary(
    p: Parser,
    data: dict[str, Any],
    titrant: chemistry.Titrant | None,
    reps: list[run_input.ReplicateInput],
    exclusions: tuple[Exclusion, ...],
    common: dict[str, Any],
    instruments: Instruments,
    rule: stats.AcceptanceRule,
) -> tuple[StandardizationResult, dict[str, Any]]:
    std_key = p.text(data.get("standard", MISSING), "standard")
    std: chemistry.PrimaryStandard | None = None
    if std_key is not None:
        try:
            std = chemistry.standard(std_key)
        except StockroomError as exc:
            p.error("standard", exc.message)
    nu = None
    if titrant is not None and std is not None:
        try:
            nu = chemistry.stoichiometric_factor(titrant, std)
        except StockroomError as exc:
            p.error("standard", exc.message)
    purity_value, purity = _purity(p, data)
    u_mass = p.number(data.get("u_mass_g", MISSING), "u_mass_g", required=False, ge=0, le=MAX_U_MASS_G, unit="g")
    buoyancy = p.boolean(data.get("buoyancy", MISSING), "buoyancy", default=True)
    mm_value = p.number(data.get("molar_mass_g_mol", MISSING), "molar_mass_g_mol", required=False, gt=0, le=5000, unit="g/mol")
    mm_u = p.number(data.get("u_molar_mass_g_mol", MISSING), "u_molar_mass_g_mol", required=False, ge=0, le=10, unit="g/mol")
    if mm_u is not None and "molar_mass_g_mol" not in data:
        p.error("u_molar_mass_g_mol", "goes with molar_mass_g_mol")
    dried_at = p.number(data.get("dried_at_c", MISSING), "dried_at_c", required=False, ge=0, le=400, unit="°C")
    replicates = _primary_replicates(reps)
    p.raise_if_errors()
    assert titrant is not None and std is not None and nu is not None
    mm = std.molar_mass
    spec = StandardSpec(
        key=std.key,
        name=std.name,
        molar_mass_g_mol=mm_value if mm_value is not None else mm.value,
        u_molar_mass_g_mol=(mm_u if mm_u is not None else mm.u) if mm_value is not None else mm.u,
        nu=nu,
        density_g_cm3=std.density_g_cm3,
    )
    alternatives = tuple(
        StandardSpec(
            key=s.key,
            name=s.name,
            molar_mass_g_mol=s.molar_mass.value,
            u_molar_mass_g_mol=s.molar_mass.u,
            nu=chemistry.stoichiometric_factor(titrant, s),
            density_g_cm3=s.density_g_cm3,
        )
        for s in chemistry.list_standards(titrant)
    )
    run = PrimaryRun(
        standard=spec,
        replicates=tuple(replicates),
        purity=purity,
        purity_value=purity_value if purity_value is not None else 1.0,
        buoyancy=bool(buoyancy),
        exclusions=exclusions,
        u_mass_g=u_mass,
        alternatives=alternatives,
        **common,
    )
    result = standardize_primary(run, instruments, rule)
    drying = chemistry.check_drying(std, dried_at) if dried_at is not None else None
    if drying:
        result = _with_warning(result, drying)
    extra = {
        "titrant": titrant.key,
        "standard": {
            "key": std.key,
            "name": std.name,
            "molar_mass_g_mol": spec.molar_mass_g_mol,
            "u_molar_mass_g_mol": spec.u_molar_mass_g_mol,
            "nu": nu,
            "endpoint": std.endpoint,
        },
    }
    return result, extra


def _with_warning(result: StandardizationResult, warning: str) -> StandardizationResult:
    from dataclasses import replace

    return replace(result, warnings=(*result.warnings, warning))


def _secondary(
    p: Parser,
    data: dict[str, Any],
    titrant: chemistry.Titrant | None,
    reps: list[run_input.ReplicateInput],
    exclusions: tuple[Exclusion, ...],
    common: dict[str, Any],
    instruments: Instruments,
    rule: stats.AcceptanceRule,
) -> tuple[StandardizationResult, dict[str, Any]]:
    ref_obj = p.mapping(data.get("reference"), "reference")
    ref_molarity = ref_u = None
    ref_titrant: chemistry.Titrant | None = None
    if ref_obj is not None:
        p.known_keys(ref_obj, REFERENCE_KEYS, "reference")
        ref_molarity = _measurable(
            p,
            p.number(ref_obj.get("molarity", MISSING), "reference.molarity", gt=0, le=MAX_MOLARITY, unit="mol/L"),
            "reference.molarity",
            MIN_MOLARITY,
            "mol/L",
        )
        ref_u = p.number(ref_obj.get("u", MISSING), "reference.u", ge=0, le=1, unit="mol/L")
        if "titrant" in ref_obj:
            ref_titrant = _titrant(p, ref_obj["titrant"], "reference.titrant")
        elif "standard" in data:
            ref_titrant = _titrant(p, data["standard"], "standard")
        else:
            p.error("reference.titrant", "is required: name the certified titrant (e.g. NaOH)")
    nu = None
    if titrant is not None and ref_titrant is not None:
        try:
            nu = chemistry.stoichiometric_factor(titrant, ref_titrant)
        except StockroomError as exc:
            p.error("reference.titrant" if ref_obj and "titrant" in ref_obj else "standard", exc.message)
    aliquot_of = p.choice(data.get("aliquot_of", MISSING), "aliquot_of", ("new", "reference"), default="new")
    u_aliquot = p.number(data.get("u_aliquot_ml", MISSING), "u_aliquot_ml", required=False, ge=0, le=MAX_U_VOLUME_ML, unit="mL")
    replicates = [
        AliquotReplicate(
            aliquot_ml=float(r.aliquot_ml or 0.0),
            volume_ml=r.volume_ml,
            blank_ml=r.blank_ml,
            temperature_c=r.temperature_c,
            endpoint_u_ml=r.curve.end_point.u_ml if r.curve else None,
            endpoint_method=r.curve.method if r.curve else None,
        )
        for r in reps
    ]
    p.raise_if_errors()
    assert titrant is not None and ref_titrant is not None and nu is not None
    assert ref_molarity is not None and ref_u is not None and aliquot_of is not None
    run = SecondaryRun(
        reference=Reference(ref_molarity, ref_u, f"reference {ref_titrant.key}", expansion=ref_titrant.expansion),
        nu=nu,
        replicates=tuple(replicates),
        aliquot_of=aliquot_of,
        exclusions=exclusions,
        u_aliquot_ml=u_aliquot,
        **common,
    )
    result = standardize_secondary(run, instruments, rule)
    extra = {
        "titrant": titrant.key,
        "reference": {"titrant": ref_titrant.key, "molarity": ref_molarity, "u": ref_u, "nu": nu},
        "aliquot_of": aliquot_of,
    }
    return result, extra


# --------------------------------------------------------------------------- result → JSON
