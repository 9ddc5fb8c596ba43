"""Every setting stockroom reads, declared once with its default and help text.

A setting's value comes from, in order: the dict passed to create_app(config=...), an environment
variable STOCKROOM_<NAME>, the instance file `stockroom.toml` beside the database, then the default.
"""

from __future__ import annotations

import os
import secrets
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any


@dataclass(frozen=True)
class Setting:
    name: str
    default: Any
    help: str
    kind: type = str


SETTINGS: tuple[Setting, ...] = (
    Setting("DATABASE", "instance/stockroom.db", "Path of the SQLite database file."),
    Setting(
        "TRAIL_KEY_FILE",
        "",
        "File holding the secret key of the audit trail's HMAC chain, kept outside the database file (made "
        "0600 on the first write). Empty: '<database>.trail-key' beside the database. Keep a copy apart from "
        "backups of the database: without it the keyed part of the trail cannot be checked. The head log "
        "'<database name>.trail-head' is written beside it.",
    ),
    Setting(
        "SECRET_KEY",
        None,
        "Key that signs session cookies and CSRF tokens. Read from the "
        "environment or the instance file; if absent a random key is made and kept in "
        "instance/secret_key beside the database (never a fixed string).",
    ),
    Setting("LAB_TIMEZONE", "Europe/London", "IANA time zone of the lab; dates and times are shown in it."),
    Setting(
        "BASE_URL",
        "",
        "Public address of this server, used in label QR codes. Empty: the address the person printing "
        "reached (the request's host and port); from the command line, http://127.0.0.1:8000.",
    ),
    Setting(
        "INSTITUTION_NAME",
        "",
        "The institution (and prep room) printed at the head of certificates, lab-day sheets and the larger "
        "labels, e.g. 'Chemistry Department, North Campus'. Empty: nothing is printed.",
    ),
    Setting("OPEN_READS", True, "Allow reading pages without signing in (lab network kiosks).", bool),
    Setting("SESSION_COOKIE_SECURE", False, "Send the session cookie only over HTTPS; turn on behind TLS.", bool),
    Setting("TRUSTED_HOSTS", "", "Comma-separated host names the server answers for; empty allows any.", str),
    Setting("MAX_CONTENT_LENGTH", 2 * 1024 * 1024, "Largest request body accepted, in bytes.", int),
    Setting("CSV_MAX_ROWS", 2000, "Most rows accepted from one uploaded CSV file.", int),
    Setting(
        "REUSE_CONNECTIONS",
        True,
        "Keep each server thread's database connection open between requests (faster; turn off to open one per request).",
        bool,
    ),
    # Defaults below feed the science core; a reagent's own policy overrides the tolerances.
    Setting("DEFAULT_TOLERANCE_REL", 0.005, "Drift tolerance, relative to the certified value (0.005 = 0.5 %).", float),
    Setting(
        "DEFAULT_MAX_RSD",
        0.002,
        "Largest repeatability RSD a run may have to be accepted (0.2 %, the pharmacopoeial limit for volumetric solutions).",
        float,
    ),
    Setting("DEFAULT_MIN_REPLICATES", 3, "Fewest replicates a run needs to be accepted.", int),
    Setting(
        "COVERAGE_K_POLICY",
        "effective-dof",
        'How k of U = k u is chosen: "effective-dof" takes k = t_p(nu_eff) at COVERAGE_PROBABILITY, nu_eff by '
        "Welch-Satterthwaite (GUM G.4), so a three-replicate run states k = 2.5 or so rather than claim 95 %; "
        '"fixed" uses COVERAGE_FACTOR, for a lab whose procedure fixes k = 2 (the certificate then says so).',
    ),
    Setting(
        "COVERAGE_PROBABILITY",
        0.95,
        "Coverage probability k is taken for when COVERAGE_K_POLICY is effective-dof (0.95 = 95 %).",
        float,
    ),
    Setting(
        "COVERAGE_FACTOR",
        2.0,
        "Coverage factor k for expanded uncertainty U = k u when COVERAGE_K_POLICY is fixed.",
        float,
    ),
    Setting(
        "SECONDARY_TEMPERATURE_TERMS",
        "shared",
        'How a run against a certified titrant treats temperature: "shared" (one lab temperature acts on the titre '
        "and the aliquot alike, so only the difference of the two solutions' expansion counts; the physical model "
        'when both stand on the same bench) or "independent" (two separate terms, as EURACHEM/CITAC QUAM:2012 A3 '
        "treats them; larger, and what reproduces A3).",
    ),
    Setting("BALANCE_READABILITY_G", 0.0001, "Analytical balance readability (last digit), g.", float),
    Setting("BALANCE_LINEARITY_G", 0.00015, "Balance linearity half-width (rectangular), g.", float),
    Setting("BURETTE_CAPACITY_ML", 50.0, "Default burette capacity, mL.", float),
    Setting(
        "BURETTE_TOLERANCE_ML",
        None,
        "Default burette tolerance half-width, mL; empty takes the ISO 385 figure for BURETTE_CAPACITY_ML in "
        "BURETTE_CLASS (±0.05 mL for a Class A 50 mL burette). A registered burette's own figure wins.",
        float,
    ),
    Setting(
        "BURETTE_CLASS",
        "A",
        "Class (A or B) of the burettes whose tolerance is taken from the ISO 385 table: the default burette, "
        "a run's burette of another size, a registered burette that states no tolerance and no class.",
    ),
    Setting("PIPETTE_CAPACITY_ML", 25.0, "Default aliquot pipette capacity, mL.", float),
    Setting(
        "PIPETTE_TOLERANCE_ML",
        None,
        "Default aliquot pipette tolerance half-width, mL; empty takes the ISO 648 figure for PIPETTE_CAPACITY_ML "
        "in PIPETTE_CLASS (±0.03 mL for a Class A 25 mL pipette). A registered pipette's own figure wins.",
        float,
    ),
    Setting(
        "PIPETTE_CLASS",
        "A",
        "Class (A or B) of the one-mark pipettes whose tolerance is taken from the ISO 648 table (as BURETTE_CLASS).",
    ),
    Setting("LAB_TEMPERATURE_HALF_RANGE_K", 3.0, "Half-width of the lab temperature range (rectangular), K.", float),
    Setting(
        "EXPANSION_COEFFICIENT_PER_K",
        2.1e-4,
        "Volume expansion coefficient of dilute aqueous titrants, 1/K (the value EURACHEM/CITAC QUAM:2012 uses for water).",
        float,
    ),
    Setting("MONTE_CARLO_DRAWS", 100_000, "Monte Carlo draws for the uncertainty cross-check.", int),
    # The prep plan's lead time: "make a new batch by" is the first shortfall less these days.
    Setting(
        "PREP_LEAD_PREPARATION_DAYS",
        2,
        "Days from starting a new batch to having it made up and mixed (sodium hydroxide is usually left to stand "
        "for its carbonate to settle). Part of the prep plan's lead time.",
        int,
    ),
    Setting(
        "PREP_LEAD_STANDARDIZATION_DAYS",
        3,
        "Days from a made-up batch to its release: standardization runs, review and the certificate. The prep plan's "
        "lead time is these plus PREP_LEAD_PREPARATION_DAYS.",
        int,
    ),
    Setting(
        "LOW_STOCK_NOTICE_DAYS",
        7,
        "Days beyond the lead time within which a coming shortfall is named under low stock on the front page "
        "(0: only shortfalls inside the lead time).",
        int,
    ),
)

_BY_NAME = {s.name: s for s in SETTINGS}


def _coerce(setting: Setting, value: Any) -> Any:
    if value is None or setting.kind is str:
        return value
    if setting.kind is bool and isinstance(value, str):
        return value.strip().lower() in {"1", "true", "yes", "on"}
    return setting.kind(value)


def resolve(overrides: dict[str, Any] | None = None) -> dict[str, Any]:
    """Return every setting's value, from overrides, environment, instance file, then default."""
    overrides = dict(overrides or {})
    db_path = overrides.get("DATABASE") or os.environ.get("STOCKROOM_DATABASE") or _BY_NAME["DATABASE"].default
    instance_dir = Path(db_path).resolve().parent
    file_values: dict[str, Any] = {}
    instance_file = instance_dir / "stockroom.toml"
    if instance_file.is_file():
        with instance_file.open("rb") as fh:
            file_values = {k.upper(): v for k, v in tomllib.load(fh).items()}
    values: dict[str, Any] = {}
    for s in SETTINGS:
        env = os.environ.get(f"STOCKROOM_{s.name}")
        if s.name in overrides:
            raw = overrides.pop(s.name)
        elif env is not None:
            raw = env
        elif s.name in file_values:
            raw = file_values[s.name]
        else:
            raw = s.default
        values[s.name] = _coerce(s, raw)
    if not values["SECRET_KEY"]:
        values["SECRET_KEY"] = _instance_secret(instance_dir)
    values.update(overrides)  # anything else (TESTING, WTF_CSRF_ENABLED...) passes through to Flask
    return values


def database_path() -> str:
    """The configured database file (environment, then default), read without side effects."""
    return os.environ.get("STOCKROOM_DATABASE") or _BY_NAME["DATABASE"].default


def _instance_secret(instance_dir: Path) -> str:
    """Read or create a random secret kept beside the database, readable by its owner only."""
    path = instance_dir / "secret_key"
    if path.is_file():
        return path.read_text().strip()
    instance_dir.mkdir(parents=True, exist_ok=True)
    key = secrets.token_hex(32)
    fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
    with os.fdopen(fd, "w") as fh:
        fh.write(key)
    return key


def describe() -> list[tuple[str, Any, str]]:
    """(name, default, help) of every setting, for the admin settings page and the docs."""
    return [(s.name, s.default, s.help) for s in SETTINGS]
