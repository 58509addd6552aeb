"""The plant file: one TOML file describing a site, its broker, database, HTTP endpoint and units.

:func:`load_plant` reads the file, validates it completely and returns a :class:`PlantConfig`
whose tags carry compiled unit converters (see :mod:`daemon.uom`).  Every problem found is
reported at once, each as ``FILE: key.path: message — fix: what to write instead``.

Secrets (the broker and database passwords, the API tokens) never live in the plant file: they
come from the environment (``BRAYSCOPE_BROKER_PASSWORD``, ``BRAYSCOPE_DATABASE_PASSWORD``,
``BRAYSCOPE_API_TOKEN``, ``BRAYSCOPE_API_READ_TOKEN``), from files named by the ``*_FILE``
variables of the same names, or from files named in the plant file (``broker.password_file``,
``database.password_file``, ``http.api_token_file``, ``http.read_token_file``).  A secret
written inline is an error, and so is a URL carrying one (a password in its user part, or a
query parameter such as ``password``, ``sslpassword``, ``token``; :func:`daemon.urls.url_secrets`),
in the plant file or in the environment.  Non-secret overrides from the environment:
``BRAYSCOPE_DATABASE_URL``, ``BRAYSCOPE_BROKER_HOST``, ``BRAYSCOPE_BROKER_PORT``,
``BRAYSCOPE_HTTP_BIND``.

Exception tree::

    PlantConfigError (ValueError)     the plant file (or its environment) is not usable;
                                      ``issues`` lists every :class:`ConfigIssue` found

Measurement names, their SI units and their physical limits are not listed here: they come from
the unit type (:func:`models.units.registry.builtin_unit_types`), so the plant file, the models and
the database can never disagree.
"""

from __future__ import annotations

import difflib
import importlib.metadata
import math
import re
import tomllib
from collections.abc import Iterator, Mapping
from pathlib import Path
from typing import Any, Literal, NamedTuple, overload

import numpy as np
import pint
from numpy.typing import NDArray
from pydantic import BaseModel, ConfigDict, Field, PrivateAttr, SecretStr, ValidationError
from pydantic_settings import BaseSettings, SettingsConfigDict

from daemon.uom import Converter, UomError, compile_converter, get_registry, parse_uom
from daemon.urls import url_secrets, urls_in
from models.units.base import FieldSpec, UnitType

__all__ = [
    "BrokerConfig",
    "ConfigIssue",
    "DaemonConfig",
    "DatabaseConfig",
    "EnvOverrides",
    "FuelConfig",
    "HttpConfig",
    "PlantConfig",
    "PlantConfigError",
    "SiteConfig",
    "TagConfig",
    "UnitConfig",
    "available_unit_types",
    "load_plant",
]

FloatArray = NDArray[np.float64]

#: Keys that would hold a secret inline; each is refused wherever it appears.
SECRET_KEYS = frozenset(
    {"password", "passwd", "pass", "token", "api_token", "read_token", "secret", "api_key"}
)
#: Why a time window has its upper bound (appended to the fix of a value above it): an absurd
#: window lets timestamps through that no row can hold, or breaks the protocol.
WINDOW_LIMITS: dict[str, str] = {
    "future_tolerance_s": "a source clock more than a day ahead is a clock fault, not data",
    "past_tolerance_s": "10 years; older source times are quarantined as past_timestamp",
    "tick_s": "one day at most",
    "max_age_s": "366 days at most",
    "stuck_after_s": "366 days at most",
    "retention_days": "100 years at most",
    "session_expiry_s": "MQTT 5 session expiry is a 4-byte integer; 4294967295 = never",
    "keepalive_s": "MQTT keep alive is a 2-byte integer of seconds",
}
#: Unit names become MQTT topic levels, SQL keys and metric labels: keep them plain.
UNIT_NAME_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]{0,63}$")
#: Default barometric reference of gauge-pressure tags.
DEFAULT_BARO_MEASUREMENT = "ambient_pressure"
#: Standard atmosphere [Pa] (ISO 2533), used only to check gauge ranges against limits.
STANDARD_ATMOSPHERE_PA = 101325.0
#: Prefix of auxiliary measurements: validated and stored, never passed to a unit type's compute.
AUX_PREFIX = "aux."
#: Name of an auxiliary measurement after :data:`AUX_PREFIX`.
AUX_NAME_RE = re.compile(r"^[a-z0-9_]{1,48}$")
#: Separator between a measurement and the sensor label of a redundant sensor
#: (``compressor_discharge_temperature:A``).
SENSOR_SEP = ":"
#: Sensor label of a redundant sensor.
SENSOR_RE = re.compile(r"^[A-Za-z0-9_-]{1,8}$")


# --------------------------------------------------------------------------------------------
# Issues and the error
# --------------------------------------------------------------------------------------------


class ConfigIssue(NamedTuple):
    """One problem of a plant file: where, what, and how to fix it."""

    file: str
    key_path: str
    message: str
    fix: str

    def __str__(self) -> str:
        where = f"{self.key_path}: " if self.key_path else ""
        return f"{self.file}: {where}{self.message} — fix: {self.fix}"


class PlantConfigError(ValueError):
    """The plant file cannot be used; ``issues`` holds every problem found."""

    def __init__(self, issues: list[ConfigIssue]) -> None:
        self.issues = list(issues)
        super().__init__("\n".join(str(i) for i in self.issues))


# --------------------------------------------------------------------------------------------
# Models of the plant file
# --------------------------------------------------------------------------------------------


class _Section(BaseModel):
    model_config = ConfigDict(extra="forbid", allow_inf_nan=False, validate_default=True)


class SiteConfig(_Section):
    """``[site]``: the plant as a whole."""

    name: str = Field(min_length=1)
    description: str = ""


class BrokerConfig(_Section):
    """``[broker]``: the MQTT broker the daemon subscribes to and publishes on."""

    host: str = Field(default="127.0.0.1", min_length=1)
    port: int = Field(default=1883, ge=1, le=65535)
    protocol: Literal["5", "3.1.1"] = "5"
    tls: bool = False
    ca_file: str = ""
    cert_file: str = ""
    key_file: str = ""
    username: str = ""
    password_file: str = ""
    client_id: str = Field(default="brayscope", min_length=1, max_length=128)
    qos: int = Field(default=1, ge=0, le=2)
    keepalive_s: float = Field(default=30.0, gt=0.0, le=65535.0)
    session_expiry_s: int = Field(default=86400, ge=0, le=4294967295)
    queue_size: int = Field(default=10000, gt=0)

    _password: SecretStr | None = PrivateAttr(default=None)

    @property
    def password(self) -> SecretStr | None:
        """The broker password (from the environment or a file), or None."""
        return self._password


class DatabaseConfig(_Section):
    """``[database]``: SQLAlchemy URL (SQLite or ``postgresql+psycopg://``) and retention.

    ``retention_days`` applies to every table; ``readings_retention_days`` and
    ``results_retention_days`` (optional) keep raw readings and results for their own periods.
    """

    url: str = Field(default="sqlite:///./brayscope-data/brayscope.sqlite", min_length=1)
    retention_days: float = Field(default=400.0, gt=0.0, le=36525.0)
    readings_retention_days: float | None = Field(default=None, gt=0.0, le=36525.0)
    results_retention_days: float | None = Field(default=None, gt=0.0, le=36525.0)
    password_file: str = ""

    _password: SecretStr | None = PrivateAttr(default=None)

    @property
    def password(self) -> SecretStr | None:
        """The database password (from the environment or a file), or None (no password, or
        PostgreSQL's own password file ``PGPASSFILE`` / ``~/.pgpass``)."""
        return self._password

    def retention_by_table(self) -> dict[str, float]:
        """Days each table keeps its rows [d]: readings and results their own periods when
        set, everything else ``retention_days``."""
        return {
            "results": self.results_retention_days or self.retention_days,
            "readings": self.readings_retention_days or self.retention_days,
            "quarantine": self.retention_days,
            "events": self.retention_days,
        }


class HttpConfig(_Section):
    """``[http]``: metrics, health and API endpoint."""

    bind: str = "127.0.0.1:9478"
    api_token_file: str = ""
    read_token_file: str = ""

    _api_token: SecretStr | None = PrivateAttr(default=None)
    _read_token: SecretStr | None = PrivateAttr(default=None)

    @property
    def api_token(self) -> SecretStr | None:
        """Token granting read and write access to the API, or None (API writes disabled)."""
        return self._api_token

    @property
    def read_token(self) -> SecretStr | None:
        """Read-only token for dashboards, or None."""
        return self._read_token

    @property
    def host(self) -> str:
        """Host part of ``bind``."""
        return _split_bind(self.bind)[0]

    @property
    def port(self) -> int:
        """Port part of ``bind``."""
        return _split_bind(self.bind)[1]


class DaemonConfig(_Section):
    """``[daemon]``: the live loop."""

    tick_s: float = Field(default=10.0, gt=0.0, le=86400.0)
    results_topic_prefix: str = Field(default="brayscope", min_length=1)
    max_payload_bytes: int = Field(default=65536, gt=0)
    future_tolerance_s: float = Field(default=300.0, ge=0.0, le=86400.0)
    past_tolerance_s: float = Field(default=86400.0, ge=0.0, le=315576000.0)
    subscriptions: Literal["exact", "parent"] = "exact"


class FuelConfig(_Section):
    """A unit's fuel: a gas by molar composition, or a liquid by LHV and elemental analysis."""

    composition: dict[str, float] | None = None
    lower_heating_value: float | None = None
    higher_heating_value: float | None = None
    carbon_mass_fraction: float | None = None
    hydrogen_mass_fraction: float | None = None
    sulfur_mass_fraction: float = 0.0
    oxygen_mass_fraction: float = 0.0
    liquid_cp: float = 2000.0

    @property
    def kind(self) -> Literal["gas", "liquid"]:
        """``"gas"`` when a composition is given, else ``"liquid"``."""
        return "gas" if self.composition is not None else "liquid"

    def build(self) -> Any:
        """Return the :class:`models.properties.fuel.FuelProperties` of this fuel.

        Raises
        ------
        models.status.ModelInputError
            Composition or analysis rejected by :mod:`models.properties.fuel`.
        ValueError
            Neither or both forms given, or a liquid without its C/H fractions.
        """
        from models.properties import fuel as fuel_mod

        if self.composition is not None:
            if self.lower_heating_value is not None or self.carbon_mass_fraction is not None:
                raise ValueError("give either composition (gas) or lower_heating_value (liquid)")
            return fuel_mod.gas_fuel(self.composition)
        if self.lower_heating_value is None:
            raise ValueError("no fuel given")
        if self.carbon_mass_fraction is None or self.hydrogen_mass_fraction is None:
            raise ValueError("a liquid fuel needs carbon_mass_fraction and hydrogen_mass_fraction")
        return fuel_mod.liquid_fuel(
            self.lower_heating_value,
            self.carbon_mass_fraction,
            self.hydrogen_mass_fraction,
            self.sulfur_mass_fraction,
            self.higher_heating_value,
            self.liquid_cp,
            oxygen_mass_fraction=self.oxygen_mass_fraction,
        )


class TagConfig(_Section):
    """One ``[[units.NAME.tags]]`` entry: a topic (and key) mapped to a canonical measurement.

    ``low``/``high`` are the plausible range in the tag's own unit; ``max_age_s`` is how long a
    value stays usable.  Gauge units need a barometric reference: ``baro_measurement`` (the
    unit's own absolute ambient pressure, the default) or a fixed ``baro_pa``.
    """

    topic: str = Field(min_length=1, max_length=1024)
    key: str = ""
    measurement: str = Field(min_length=1)
    uom: str
    low: float
    high: float
    max_age_s: float = Field(default=60.0, gt=0.0, le=31622400.0)
    baro_measurement: str | None = None
    baro_pa: float | None = Field(default=None, gt=0.0)
    max_spread: float | None = Field(default=None, gt=0.0)
    stuck_after_s: float | None = Field(default=None, gt=0.0, le=31622400.0)
    stuck_band: float = Field(default=0.0, ge=0.0)
    description: str = ""

    _converter: Converter | None = PrivateAttr(default=None)

    @property
    def is_aux(self) -> bool:
        """True for an auxiliary measurement (``aux.<name>``): validated and stored, held by
        the assembly, never passed to compute."""
        return self.measurement.startswith(AUX_PREFIX)

    @property
    def canonical(self) -> str:
        """The measurement without a sensor label (``compressor_discharge_temperature`` for
        ``compressor_discharge_temperature:A``); the measurement itself otherwise."""
        return self.measurement.split(SENSOR_SEP, 1)[0]

    @property
    def sensor(self) -> str:
        """The sensor label of a redundant sensor (``"A"``), or ``""``."""
        _, sep, label = self.measurement.partition(SENSOR_SEP)
        return label if sep else ""

    @property
    def max_spread_si(self) -> float | None:
        """``max_spread`` converted to the SI unit of the measurement (a difference: scale
        only, no offset), or None."""
        if self.max_spread is None:
            return None
        return abs(self.converter.scale) * self.max_spread

    @property
    def converter(self) -> Converter:
        """The compiled converter (set by :func:`load_plant`)."""
        # read the private slot directly: pydantic's attribute lookup for private attributes
        # costs microseconds, and this sits on the per-reading path
        conv: Converter | None = self.__pydantic_private__["_converter"]  # type: ignore[index]
        if conv is None:
            raise RuntimeError("tag not compiled: load the plant file with load_plant()")
        return conv

    @property
    def is_gauge(self) -> bool:
        """True for gauge-pressure units (barg, psig, kPag ...)."""
        return parse_uom(self.uom).gauge

    @property
    def baro_reference(self) -> str | None:
        """Measurement name supplying the barometric reference of a gauge tag (None when a
        fixed ``baro_pa`` is used, or for non-gauge tags)."""
        if not self.is_gauge or self.baro_pa is not None:
            return None
        return self.baro_measurement or DEFAULT_BARO_MEASUREMENT

    @overload
    def to_si(self, value: float, baro_pa: float | None = None) -> float: ...

    @overload
    def to_si(self, value: FloatArray, baro_pa: float | FloatArray | None = None) -> FloatArray: ...

    def to_si(self, value: Any, baro_pa: Any = None) -> Any:
        """Convert a value (or array) in the tag's unit to SI.

        Parameters
        ----------
        value : float or ndarray
            Value(s) in ``uom``.
        baro_pa : float or ndarray, optional
            Barometric pressure [Pa] for gauge tags; defaults to the tag's fixed ``baro_pa``.

        Returns
        -------
        float or ndarray
            The value in the measurement's SI unit.
        """
        if baro_pa is None:
            baro_pa = self.baro_pa
        return self.converter(value, baro_pa)

    def in_range(self, value: float) -> bool:
        """True when ``value`` (tag units) lies within ``low``..``high``."""
        return self.low <= value <= self.high


class UnitConfig(_Section):
    """``[units.NAME]``: one machine, its static data and its tags."""

    unit_type: str = Field(min_length=1)
    description: str = ""
    fuel: FuelConfig
    parameters: dict[str, float] = Field(default_factory=dict)
    baseline: dict[str, float] = Field(default_factory=dict)
    tags: list[TagConfig] = Field(min_length=1)

    _unit_type_impl: UnitType | None = PrivateAttr(default=None)
    _fuel_properties: Any = PrivateAttr(default=None)

    @property
    def unit_type_impl(self) -> UnitType:
        """The implementation of ``unit_type`` (schema and compute; set by :func:`load_plant`)."""
        if self._unit_type_impl is None:
            raise RuntimeError("unit not resolved: load the plant file with load_plant()")
        return self._unit_type_impl

    @property
    def fuel_properties(self) -> Any:
        """:class:`models.properties.fuel.FuelProperties` built from ``fuel`` at load."""
        return self._fuel_properties

    def effective_parameters(self) -> dict[str, float]:
        """Parameters with the unit type's defaults filled in for those not given."""
        out = {
            p.name: float(p.default)
            for p in self.unit_type_impl.parameters
            if p.default is not None
        }
        out.update(self.parameters)
        return out

    def tag_for(self, measurement: str) -> TagConfig | None:
        """The tag mapped to ``measurement`` (exact name, e.g. ``ambient_pressure:A`` for one
        sensor of a redundant pair), or None."""
        for tag in self.tags:
            if tag.measurement == measurement:
                return tag
        return None

    def sensor_groups(self) -> dict[str, list[TagConfig]]:
        """Redundant sensors: canonical measurement → its sensor tags (``name:label``), for
        every measurement mapped with sensor labels."""
        out: dict[str, list[TagConfig]] = {}
        for tag in self.tags:
            if tag.sensor:
                out.setdefault(tag.canonical, []).append(tag)
        return out

    def aux_tags(self) -> list[TagConfig]:
        """The auxiliary tags (``aux.<name>``), in file order."""
        return [t for t in self.tags if t.is_aux]


class PlantConfig(_Section):
    """The whole plant file."""

    site: SiteConfig
    broker: BrokerConfig = Field(default_factory=BrokerConfig)
    database: DatabaseConfig = Field(default_factory=DatabaseConfig)
    http: HttpConfig = Field(default_factory=HttpConfig)
    daemon: DaemonConfig = Field(default_factory=DaemonConfig)
    units: dict[str, UnitConfig] = Field(min_length=1)

    _source: str = PrivateAttr(default="")
    _deprecations: list[ConfigIssue] = PrivateAttr(default_factory=list)

    @property
    def source(self) -> str:
        """Path of the plant file this was loaded from."""
        return self._source

    @property
    def deprecations(self) -> list[ConfigIssue]:
        """Deprecated keys and names found in the file: accepted in this release, refused in
        the next (each with the fix).  ``brayscope check`` and ``trend`` print them, the
        daemon logs them as warnings at start."""
        return list(self._deprecations)

    def iter_tags(self) -> Iterator[tuple[str, TagConfig]]:
        """Yield ``(unit_name, tag)`` for every tag, in file order."""
        for name, unit in self.units.items():
            for tag in unit.tags:
                yield name, tag

    @property
    def n_tags(self) -> int:
        """Number of tags over all units."""
        return sum(len(u.tags) for u in self.units.values())

    def tag_index(self) -> dict[tuple[str, str], tuple[str, TagConfig]]:
        """Map ``(topic, key)`` → ``(unit_name, tag)``; keys are unique (checked at load)."""
        return {(t.topic, t.key): (u, t) for u, t in self.iter_tags()}

    def topics(self) -> list[str]:
        """Distinct topics of all tags, sorted."""
        return sorted({t.topic for _, t in self.iter_tags()})

    def subscriptions(self) -> list[str]:
        """MQTT topic filters to subscribe to, derived from the tags.

        ``daemon.subscriptions = "exact"`` (default): one filter per distinct topic, so
        unmapped topics are never received.  ``"parent"``: topics sharing a parent level become
        one ``parent/+`` filter (fewer subscriptions; unmapped siblings arrive and are
        quarantined as ``unknown_topic``).
        """
        topics = self.topics()
        if self.daemon.subscriptions == "exact":
            return topics
        by_parent: dict[str, list[str]] = {}
        for t in topics:
            parent = t.rsplit("/", 1)[0] if "/" in t else ""
            by_parent.setdefault(parent, []).append(t)
        out: list[str] = []
        for parent, group in by_parent.items():
            if parent and len(group) > 1:
                out.append(f"{parent}/+")
            else:
                out.extend(group)
        return sorted(out)


# --------------------------------------------------------------------------------------------
# Environment
# --------------------------------------------------------------------------------------------


class EnvOverrides(BaseSettings):
    """Settings taken from ``BRAYSCOPE_*`` environment variables (read when instantiated)."""

    model_config = SettingsConfigDict(env_prefix="BRAYSCOPE_", extra="ignore")

    database_url: str | None = None
    database_password: SecretStr | None = None
    database_password_file: str | None = None
    broker_host: str | None = None
    broker_port: int | None = Field(default=None, ge=1, le=65535)
    broker_password: SecretStr | None = None
    broker_password_file: str | None = None
    http_bind: str | None = None
    api_token: SecretStr | None = None
    api_token_file: str | None = None
    api_read_token: SecretStr | None = None
    api_read_token_file: str | None = None


# --------------------------------------------------------------------------------------------
# Unit types
# --------------------------------------------------------------------------------------------


def available_unit_types() -> dict[str, UnitType]:
    """Unit types known to this installation: ``models``' built-ins plus the
    ``brayscope.unit_types`` entry points (a plug-in that fails to load is skipped and named
    in the error of any unit that uses it)."""
    from models.units.registry import builtin_unit_types

    types: dict[str, UnitType] = dict(builtin_unit_types())
    for ep in importlib.metadata.entry_points(group="brayscope.unit_types"):
        try:
            obj = ep.load()
        except Exception:  # noqa: S112 - a broken plug-in must not hide the others
            continue
        name = getattr(obj, "name", ep.name)
        types.setdefault(name, obj)
    return types


# --------------------------------------------------------------------------------------------
# Loading
# --------------------------------------------------------------------------------------------


def load_plant(
    path: str | Path,
    *,
    registry: pint.UnitRegistry[Any] | None = None,
    unit_types: Mapping[str, UnitType] | None = None,
    env: EnvOverrides | None = None,
) -> PlantConfig:
    """Read, validate and compile a plant file.

    Parameters
    ----------
    path : str or Path
        The TOML plant file.
    registry : pint.UnitRegistry, optional
        Units registry; the cached process registry by default.
    unit_types : mapping name -> UnitType, optional
        Unit types to resolve ``units.*.unit_type``; :func:`available_unit_types` by default.
    env : EnvOverrides, optional
        Environment overrides; read from ``os.environ`` now by default.

    Returns
    -------
    PlantConfig
        Validated configuration; every tag has its compiled converter, every unit its unit type
        and fuel properties; environment overrides and secrets are applied.

    Raises
    ------
    PlantConfigError
        With every problem found (file, key path, message, fix).
    """
    p = Path(path)
    fname = str(path)
    try:
        raw = tomllib.loads(p.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise PlantConfigError(
            [ConfigIssue(fname, "", "file not found", "give the path of an existing plant file")]
        ) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise PlantConfigError(
            [ConfigIssue(fname, "", f"cannot read file: {exc}", "check the path and permissions")]
        ) from None
    except tomllib.TOMLDecodeError as exc:
        raise PlantConfigError(
            [ConfigIssue(fname, "", f"not valid TOML: {exc}", "fix the TOML syntax there")]
        ) from None

    checker = _Checker(fname, p.parent, registry, unit_types)
    plant = checker.run(raw, env)
    if checker.issues or plant is None:
        raise PlantConfigError(checker.issues)
    plant._source = fname
    plant._deprecations = list(checker.deprecations)
    return plant


class _Checker:
    """Collects every issue of one plant file."""

    def __init__(
        self,
        fname: str,
        base_dir: Path,
        registry: pint.UnitRegistry[Any] | None,
        unit_types: Mapping[str, UnitType] | None,
    ) -> None:
        self.fname = fname
        self.base_dir = base_dir
        self._registry = registry
        self._unit_types = unit_types
        self.issues: list[ConfigIssue] = []
        self.deprecations: list[ConfigIssue] = []

    # -- helpers -------------------------------------------------------------------------------

    def add(self, key_path: str, message: str, fix: str) -> None:
        self.issues.append(ConfigIssue(self.fname, key_path, message, fix))

    @property
    def registry(self) -> pint.UnitRegistry[Any]:
        if self._registry is None:
            self._registry = get_registry()
        return self._registry

    @property
    def unit_types(self) -> Mapping[str, UnitType]:
        if self._unit_types is None:
            self._unit_types = available_unit_types()
        return self._unit_types

    # -- driver --------------------------------------------------------------------------------

    def run(self, raw: dict[str, Any], env: EnvOverrides | None) -> PlantConfig | None:
        self._rename_deprecated(raw)
        self._check_inline_secrets(raw, "")
        self._check_urls(raw, "")
        plant: PlantConfig | None = None
        units: dict[str, _UnitView] = {}
        try:
            plant = PlantConfig.model_validate(raw)
            units = {
                n: _UnitView(u, list(enumerate(u.tags)), set()) for n, u in plant.units.items()
            }
        except ValidationError as exc:
            self._add_validation_errors(exc, PlantConfig, prefix=())
            # check what is structurally fine, so that all problems show at once
            raw_units = raw.get("units")
            if isinstance(raw_units, dict):
                for name, raw_unit in raw_units.items():
                    view = _partial_unit(raw_unit)
                    if view is not None:
                        units[name] = view
        for name, view in units.items():
            self._check_unit(name, view)
        self._check_duplicate_topics(units)
        if plant is not None:
            self._apply_environment(plant, env)
        return plant

    # -- deprecated names (accepted for one release) ------------------------------------------

    def _deprecated(self, key_path: str, old: str, new: str | None, why: str = "") -> None:
        if new is None:
            message = f"{old!r} is deprecated and ignored ({why})"
            fix = "delete this line (it is refused from the next release)"
        else:
            message = f"{old!r} is a deprecated name (accepted in this release only)"
            fix = f"rename it to {new!r}"
        self.deprecations.append(ConfigIssue(self.fname, key_path, message, fix))

    def _rename_deprecated(self, raw: dict[str, Any]) -> None:
        """Rewrite old names in place to the current ones, noting each (docs: CHANGELOG)."""
        from daemon.renames import REMOVED_DAEMON_KEYS, RENAMED_RESULTS, RENAMED_UNIT_KEYS

        daemon = raw.get("daemon")
        if isinstance(daemon, dict):
            for key, why in REMOVED_DAEMON_KEYS.items():
                if key in daemon:
                    del daemon[key]
                    self._deprecated(f"daemon.{key}", key, None, why)
        units = raw.get("units")
        if not isinstance(units, dict):
            return
        for name, unit in units.items():
            if not isinstance(unit, dict):
                continue
            for old, new in RENAMED_UNIT_KEYS.items():
                if old in unit and new not in unit:
                    unit[new] = unit.pop(old)
                    self._deprecated(f"units.{name}.{old}", old, new)
            baseline = unit.get("baseline")
            if isinstance(baseline, dict):
                for old, new in RENAMED_RESULTS.items():
                    if old in baseline and new not in baseline:
                        baseline[new] = baseline.pop(old)
                        self._deprecated(f"units.{name}.baseline.{old}", old, new)

    # -- secrets ---------------------------------------------------------------------------------

    def _check_inline_secrets(self, node: Any, path: str) -> None:
        if isinstance(node, dict):
            for k, v in node.items():
                sub = f"{path}.{k}" if path else str(k)
                if str(k).lower() in SECRET_KEYS:
                    env_name = _secret_env_name(path, str(k))
                    self.add(
                        sub,
                        "a secret written inline in the plant file (the value is not shown)",
                        f"delete this line; set {env_name} in the environment, or put the secret "
                        f"in a file readable only by the daemon and name it with "
                        f"{env_name}_FILE or a *_file key",
                    )
                else:
                    self._check_inline_secrets(v, sub)
        elif isinstance(node, list):
            for i, v in enumerate(node):
                self._check_inline_secrets(v, f"{path}[{i}]")

    def _check_urls(self, node: Any, path: str) -> None:
        """Refuse every URL of the plant file that carries a secret (any key, any depth)."""
        if isinstance(node, dict):
            for k, v in node.items():
                self._check_urls(v, f"{path}.{k}" if path else str(k))
        elif isinstance(node, list):
            for i, v in enumerate(node):
                self._check_urls(v, f"{path}[{i}]")
        elif isinstance(node, str):
            for issue in _url_issues(node, self.fname, path):
                self.issues.append(issue)

    # -- pydantic errors -----------------------------------------------------------------------

    def _add_validation_errors(
        self, exc: ValidationError, model: type[BaseModel], prefix: tuple[str | int, ...]
    ) -> None:
        for err in exc.errors(include_url=False, include_input=False):
            loc = prefix + tuple(err["loc"])
            if err["type"] == "extra_forbidden" and str(loc[-1]).lower() in SECRET_KEYS:
                continue  # reported as an inline secret
            self.add(_key_path(loc), _message(err), _fix(err, model, tuple(err["loc"])))

    # -- units ---------------------------------------------------------------------------------

    def _check_unit(self, name: str, view: _UnitView) -> None:
        unit = view.unit
        base = f"units.{name}"
        if not UNIT_NAME_RE.match(name):
            self.add(
                base,
                f"unit name {name!r} has characters that cannot be used in topics and labels",
                "use letters, digits, '-', '_' or '.', starting with a letter or digit "
                "(at most 64)",
            )
        unit_type = self.unit_types.get(unit.unit_type)
        if unit_type is None:
            self.add(
                f"{base}.unit_type",
                f"unknown unit type {unit.unit_type!r}",
                f"use one of {', '.join(sorted(self.unit_types))}"
                + _did_you_mean(unit.unit_type, self.unit_types),
            )
            return
        unit._unit_type_impl = unit_type
        self._check_fuel(base, unit)
        self._check_named_values(
            f"{base}.parameters", unit.parameters, unit_type.parameters, "parameter"
        )
        missing = [
            p.name
            for p in unit_type.parameters
            if p.required and p.default is None and p.name not in unit.parameters
        ]
        if missing:
            self.add(
                f"{base}.parameters",
                f"required parameter(s) missing: {', '.join(missing)}",
                "add them to the unit's parameters table",
            )
        self._check_named_values(f"{base}.baseline", unit.baseline, unit_type.results, "result")
        self._check_tags(base, view, unit_type)

    def _check_fuel(self, base: str, unit: UnitConfig) -> None:
        from models.status import ModelInputError

        f = unit.fuel
        if f.composition is not None and (
            f.lower_heating_value is not None
            or f.carbon_mass_fraction is not None
            or f.hydrogen_mass_fraction is not None
        ):
            self.add(
                f"{base}.fuel",
                "both a gas composition and liquid-fuel data are given",
                "keep either composition = {...} (gas) or lower_heating_value with "
                "carbon_mass_fraction and hydrogen_mass_fraction (liquid)",
            )
            return
        if f.composition is None and f.lower_heating_value is None:
            self.add(
                f"{base}.fuel",
                "no fuel described",
                "write fuel = { composition = { CH4 = 0.93, ... } } (gas, mole fractions) or "
                "fuel = { lower_heating_value = 42.8e6, carbon_mass_fraction = 0.866, "
                "hydrogen_mass_fraction = 0.134 } (liquid, J/kg and mass fractions)",
            )
            return
        try:
            unit._fuel_properties = f.build()
        except ModelInputError as exc:
            self.add(f"{base}.fuel", f"fuel rejected: {exc}", _fuel_fix(exc.name))
        except ValueError as exc:
            self.add(f"{base}.fuel", f"fuel rejected: {exc}", "see docs/configuration.md, [fuel]")

    def _check_named_values(
        self, path: str, values: Mapping[str, float], specs: tuple[FieldSpec, ...], what: str
    ) -> None:
        by_name = {s.name: s for s in specs}
        for key, value in values.items():
            spec = by_name.get(key)
            if spec is None:
                self.add(
                    f"{path}.{key}",
                    f"unknown {what} {key!r}",
                    f"use one of {', '.join(sorted(by_name))}" + _did_you_mean(key, by_name),
                )
                continue
            if not (spec.low <= value <= spec.high):
                self.add(
                    f"{path}.{key}",
                    f"{value!r} is outside the possible range {_range(spec)}",
                    f"give a value within {_range(spec)} (SI unit {spec.unit})",
                )

    def _check_tags(self, base: str, view: _UnitView, unit_type: UnitType) -> None:
        unit = view.unit
        specs = {m.name: m for m in unit_type.measurements}
        seen: dict[str, list[int]] = {}
        aux_seen: dict[str, list[int]] = {}
        for i, tag in view.tags:
            tpath = f"{base}.tags[{i}]"
            where = f" (tag {tag.topic}{'#' + tag.key if tag.key else ''})"
            if any(c in tag.topic for c in "+#\x00"):
                self.add(
                    f"{tpath}.topic",
                    f"topic {tag.topic!r} contains a wildcard or NUL{where}",
                    "write the exact topic; subscriptions are derived from the tags",
                )
            self._check_fault_keys(tpath, tag, where)
            if tag.is_aux:
                if self._check_aux_tag(tpath, tag, where):
                    aux_seen.setdefault(tag.measurement, []).append(i)
                continue
            spec = specs.get(tag.canonical)
            if spec is None:
                self.add(
                    f"{tpath}.measurement",
                    f"unknown measurement {tag.canonical!r} for unit type {unit_type.name!r}"
                    f"{where}",
                    f"use one of {', '.join(specs)}, or aux.<name> for an auxiliary value "
                    "that is stored but not computed with" + _did_you_mean(tag.canonical, specs),
                )
                continue
            if SENSOR_SEP in tag.measurement and not SENSOR_RE.match(tag.sensor):
                self.add(
                    f"{tpath}.measurement",
                    f"sensor label {tag.sensor!r} of {tag.measurement!r} is not usable{where}",
                    "write the measurement followed by ':' and a short label of letters, digits, "
                    "'_' or '-' (at most 8), e.g. " + f"{tag.canonical}:A",
                )
                continue
            seen.setdefault(tag.canonical, []).append(i)
            try:
                tag._converter = compile_converter(tag.uom, spec.unit, self.registry)
            except UomError as exc:
                self.add(f"{tpath}.uom", exc.message + where, exc.fix)
                continue
            self._check_baro(tpath, tag, unit, specs, where)
            self._check_range(tpath, tag, spec, where)
        tags = dict(view.tags)
        for name, idx in seen.items():
            self._check_group(base, name, [(i, tags[i]) for i in idx])
        for name, idx in aux_seen.items():
            if len(idx) > 1:
                places = ", ".join(f"tags[{i}]" for i in idx)
                self.add(
                    f"{base}.tags",
                    f"auxiliary measurement {name!r} is mapped {len(idx)} times ({places})",
                    "give each auxiliary tag its own aux.<name>",
                )
        assumed = {m.split(SENSOR_SEP, 1)[0] for m in view.assumed}
        missing = [
            m.name
            for m in unit_type.measurements
            if m.required and m.name not in seen and m.name not in assumed
        ]
        if missing:
            self.add(
                f"{base}.tags",
                f"required measurement(s) not mapped: {', '.join(missing)}",
                "add a [[units." + base.split(".", 1)[1] + ".tags]] entry for each",
            )

    def _check_fault_keys(self, tpath: str, tag: TagConfig, where: str) -> None:
        if tag.stuck_band > 0.0 and tag.stuck_after_s is None:
            self.add(
                f"{tpath}.stuck_band",
                f"stuck_band is given without stuck_after_s{where}",
                "add stuck_after_s = <seconds> to enable the stuck-sensor test, or remove "
                "stuck_band",
            )
        if tag.max_spread is not None and not tag.sensor:
            self.add(
                f"{tpath}.max_spread",
                f"max_spread applies to redundant sensors only{where}",
                f'label the redundant tags measurement = "{tag.canonical}:A", '
                f'"{tag.canonical}:B" ..., or remove max_spread',
            )

    def _check_aux_tag(self, tpath: str, tag: TagConfig, where: str) -> bool:
        name = tag.measurement[len(AUX_PREFIX) :]
        if not AUX_NAME_RE.match(name):
            self.add(
                f"{tpath}.measurement",
                f"auxiliary measurement {tag.measurement!r} has an unusable name{where}",
                "write aux.<name> with 1 to 48 lower-case letters, digits or '_', e.g. "
                "aux.bearing_vibration",
            )
            return False
        try:
            target = _si_target(tag.uom, self.registry)
            tag._converter = compile_converter(tag.uom, target, self.registry)
        except UomError as exc:
            self.add(f"{tpath}.uom", exc.message + where, exc.fix)
            return False
        if tag.is_gauge:
            self.add(
                f"{tpath}.uom",
                f"gauge unit {tag.uom!r} on an auxiliary measurement{where}",
                "use an absolute or differential unit (bar, kPa, mbar) for auxiliary values",
            )
            return False
        if tag.baro_pa is not None or tag.baro_measurement is not None:
            self.add(
                tpath,
                f"barometric reference given for an auxiliary measurement{where}",
                "remove baro_pa/baro_measurement",
            )
        if not tag.low < tag.high:
            self.add(
                tpath,
                f"plausible range low={tag.low!r} is not below high={tag.high!r}{where}",
                "set low < high, both in the tag's own unit " + repr(tag.uom),
            )
        return True

    def _check_group(self, base: str, name: str, members: list[tuple[int, TagConfig]]) -> None:
        """Several tags of one measurement are allowed only as labelled redundant sensors
        (``name:A``, ``name:B`` ...), each with ``max_spread``."""
        if len(members) < 2:
            return
        places = ", ".join(f"tags[{i}]" for i, _ in members)
        unlabelled = [i for i, t in members if not t.sensor]
        if unlabelled:
            self.add(
                f"{base}.tags",
                f"measurement {name!r} is mapped {len(members)} times ({places})",
                "map each measurement exactly once; for redundant sensors label every one "
                f'(measurement = "{name}:A", "{name}:B" ...) and give each max_spread',
            )
            return
        labels = [t.sensor for _, t in members]
        dupes = sorted({x for x in labels if labels.count(x) > 1})
        if dupes:
            self.add(
                f"{base}.tags",
                f"sensor label(s) {', '.join(dupes)} of {name!r} used twice ({places})",
                "give every redundant sensor its own label",
            )
        for i, t in members:
            if t.max_spread is None:
                self.add(
                    f"{base}.tags[{i}].max_spread",
                    f"redundant sensor {t.measurement!r} has no max_spread (tag {t.topic}"
                    f"{'#' + t.key if t.key else ''})",
                    "give max_spread = <largest allowed difference between the sensors, in "
                    f"the tag's unit {t.uom!r}>",
                )

    def _check_baro(
        self,
        tpath: str,
        tag: TagConfig,
        unit: UnitConfig,
        specs: Mapping[str, FieldSpec],
        where: str,
    ) -> None:
        if not tag.is_gauge:
            if tag.baro_pa is not None or tag.baro_measurement is not None:
                self.add(
                    tpath,
                    f"barometric reference given for the non-gauge unit {tag.uom!r}{where}",
                    "remove baro_pa/baro_measurement, or use a gauge unit (barg, kPag, psig)",
                )
            return
        if tag.baro_pa is not None and tag.baro_measurement is not None:
            self.add(
                tpath,
                f"both baro_pa and baro_measurement are given{where}",
                'keep one: baro_measurement = "ambient_pressure" (measured) or baro_pa = 101325',
            )
            return
        ref = tag.baro_reference
        if ref is None:
            return
        ref_canonical = ref.split(SENSOR_SEP, 1)[0]
        if ref_canonical not in specs or specs[ref_canonical].unit != "Pa":
            self.add(
                f"{tpath}.baro_measurement",
                f"barometric reference {ref!r} is not a pressure measurement of this unit "
                f"type{where}",
                "name an absolute pressure measurement (ambient_pressure), or set baro_pa",
            )
            return
        ref_tag = unit.tag_for(ref)
        if ref_tag is None:
            self.add(
                f"{tpath}.baro_measurement",
                f"gauge unit {tag.uom!r} needs the barometric reference {ref!r}, which no tag "
                f"of this unit maps{where}",
                f"add a tag for {ref} in an absolute unit (mbar, kPa, hPa), or set baro_pa = "
                "101325 on this tag",
            )
        elif parse_uom(ref_tag.uom).gauge:
            self.add(
                f"{tpath}.baro_measurement",
                f"the barometric reference {ref!r} is itself a gauge reading{where}",
                f"map {ref} in an absolute unit (mbar, kPa, hPa)",
            )

    def _check_range(self, tpath: str, tag: TagConfig, spec: FieldSpec, where: str) -> None:
        if not tag.low < tag.high:
            self.add(
                tpath,
                f"plausible range low={tag.low!r} is not below high={tag.high!r}{where}",
                "set low < high, both in the tag's own unit " + repr(tag.uom),
            )
            return
        baro = tag.baro_pa if tag.baro_pa is not None else STANDARD_ATMOSPHERE_PA
        lo = tag.to_si(tag.low, baro)
        hi = tag.to_si(tag.high, baro)
        if lo < spec.low or hi > spec.high:
            conv = tag.converter
            lo_own = _inverse_or_none(conv, spec.low, baro)
            hi_own = _inverse_or_none(conv, spec.high, baro)
            self.add(
                tpath,
                f"plausible range {tag.low:g}..{tag.high:g} {tag.uom} ({lo:g}..{hi:g} "
                f"{spec.unit}) exceeds the physical limits of {spec.name} {_range(spec)}{where}",
                "narrow low/high to lie within "
                + (
                    f"{lo_own:g}..{hi_own:g} {tag.uom}"
                    if lo_own is not None and hi_own is not None
                    else _range(spec)
                ),
            )

    def _check_duplicate_topics(self, units: Mapping[str, _UnitView]) -> None:
        first: dict[tuple[str, str], str] = {}
        for name, view in units.items():
            for i, tag in view.tags:
                here = f"units.{name}.tags[{i}]"
                k = (tag.topic, tag.key)
                if k in first:
                    self.add(
                        here,
                        f"topic {tag.topic!r}"
                        + (f" key {tag.key!r}" if tag.key else "")
                        + f" is already mapped by {first[k]}",
                        "map each topic (and key) to exactly one measurement of one unit",
                    )
                else:
                    first[k] = here

    # -- environment and secrets -----------------------------------------------------------------

    def _apply_environment(self, plant: PlantConfig, env: EnvOverrides | None) -> None:
        if env is None:
            try:
                env = EnvOverrides()
            except ValidationError as exc:
                for err in exc.errors(include_url=False, include_input=False):
                    var = "BRAYSCOPE_" + "_".join(str(x) for x in err["loc"]).upper()
                    self.issues.append(
                        ConfigIssue("environment", var, _message(err), "fix or unset " + var)
                    )
                return
        for name, value in env.model_dump().items():
            if isinstance(value, str):
                var = "BRAYSCOPE_" + name.upper()
                self.issues.extend(_url_issues(value, "environment", var))
        if env.database_url:
            plant.database.url = env.database_url
        if env.broker_host:
            plant.broker.host = env.broker_host
        if env.broker_port is not None:
            plant.broker.port = env.broker_port
        if env.http_bind:
            plant.http.bind = env.http_bind
        try:
            _split_bind(plant.http.bind)
        except ValueError as exc:
            self.add("http.bind", str(exc), "write HOST:PORT, e.g. 127.0.0.1:9478")

        plant.broker._password = self._secret(
            env.broker_password,
            env.broker_password_file,
            plant.broker.password_file,
            "BRAYSCOPE_BROKER_PASSWORD",
            "broker.password_file",
        )
        plant.database._password = self._secret(
            env.database_password,
            env.database_password_file,
            plant.database.password_file,
            "BRAYSCOPE_DATABASE_PASSWORD",
            "database.password_file",
        )
        plant.http._api_token = self._secret(
            env.api_token,
            env.api_token_file,
            plant.http.api_token_file,
            "BRAYSCOPE_API_TOKEN",
            "http.api_token_file",
        )
        plant.http._read_token = self._secret(
            env.api_read_token,
            env.api_read_token_file,
            plant.http.read_token_file,
            "BRAYSCOPE_API_READ_TOKEN",
            "http.read_token_file",
        )
        for key in ("ca_file", "cert_file", "key_file"):
            value = getattr(plant.broker, key)
            if value and not self._resolve(value).is_file():
                self.add(f"broker.{key}", f"file not found: {value}", "give an existing file path")

    def _resolve(self, file: str) -> Path:
        p = Path(file).expanduser()
        return p if p.is_absolute() else self.base_dir / p

    def _secret(
        self,
        value: SecretStr | None,
        env_file: str | None,
        plant_file: str,
        env_name: str,
        key_path: str,
    ) -> SecretStr | None:
        if value is not None and value.get_secret_value():
            return value
        if env_file:
            return self._read_secret_file(
                Path(env_file).expanduser(), "environment", env_name + "_FILE"
            )
        if plant_file:
            return self._read_secret_file(self._resolve(plant_file), self.fname, key_path)
        return None

    def _read_secret_file(self, path: Path, file: str, key: str) -> SecretStr | None:
        try:
            text = path.read_text(encoding="utf-8").strip()
        except OSError as exc:
            self.issues.append(
                ConfigIssue(
                    file,
                    key,
                    f"cannot read secret file {path}: {exc.strerror}",
                    "create the file (mode 0600, owned by the daemon user) or fix the path",
                )
            )
            return None
        if not text:
            self.issues.append(
                ConfigIssue(file, key, f"secret file {path} is empty", "write the secret into it")
            )
            return None
        return SecretStr(text)


# --------------------------------------------------------------------------------------------
# Small helpers
# --------------------------------------------------------------------------------------------


class _UnitView(NamedTuple):
    """A unit as far as it validated: its tags with their index in the file, and the
    measurements of tags that failed structurally (not reported again as unmapped)."""

    unit: UnitConfig
    tags: list[tuple[int, TagConfig]]
    assumed: set[str]


def _partial_unit(raw_unit: Any) -> _UnitView | None:
    """Validate what can be validated of a unit that failed as a whole."""
    if not isinstance(raw_unit, dict):
        return None
    raw_tags = raw_unit.get("tags")
    good: list[tuple[int, TagConfig]] = []
    good_raw: list[Any] = []
    assumed: set[str] = set()
    if isinstance(raw_tags, list):
        for i, raw_tag in enumerate(raw_tags):
            try:
                good.append((i, TagConfig.model_validate(raw_tag)))
                good_raw.append(raw_tag)
            except ValidationError:
                if isinstance(raw_tag, dict) and isinstance(raw_tag.get("measurement"), str):
                    assumed.add(raw_tag["measurement"])
    if not good:
        return None
    try:
        unit = UnitConfig.model_validate({**raw_unit, "tags": good_raw})
    except ValidationError:
        return None
    # the tag objects must be the unit's own (converters are attached to them)
    return _UnitView(unit, [(i, t) for (i, _), t in zip(good, unit.tags, strict=True)], assumed)


def _key_path(loc: tuple[str | int, ...]) -> str:
    out = ""
    for part in loc:
        if isinstance(part, int):
            out += f"[{part}]"
        else:
            out += f".{part}" if out else str(part)
    return out


def _message(err: Any) -> str:
    kind = err["type"]
    if kind == "missing":
        return "required key missing"
    if kind == "extra_forbidden":
        return "unknown key"
    return str(err["msg"])


def _model_at(model: type[BaseModel], loc: tuple[str | int, ...]) -> type[BaseModel] | None:
    """Walk a model's annotations along ``loc`` (dict keys and list indices skipped); return
    the model owning the last element, or None."""
    current: Any = model
    for part in loc[:-1]:
        if isinstance(current, type) and issubclass(current, BaseModel):
            field = current.model_fields.get(str(part))
            if field is None:
                return None
            current = field.annotation
            continue
        args: tuple[Any, ...] = tuple(getattr(current, "__args__", ()))
        origin = getattr(current, "__origin__", None)
        if origin is dict and len(args) == 2:
            current = args[-1]
        elif origin is list and args:
            current = args[0]
        else:
            return None
    # resolve containers at the end (e.g. loc ends inside dict[str, Model])
    while not (isinstance(current, type) and issubclass(current, BaseModel)):
        args = getattr(current, "__args__", ())
        if not args:
            return None
        current = args[-1]
    return current


def _fix(err: Any, model: type[BaseModel], loc: tuple[str | int, ...]) -> str:
    kind = err["type"]
    ctx = err.get("ctx") or {}
    owner = _model_at(model, loc)
    if kind == "extra_forbidden":
        if owner is not None:
            allowed = ", ".join(owner.model_fields)
            hint = _did_you_mean(str(loc[-1]), owner.model_fields)
            return f"remove it or correct the spelling{hint}; allowed here: {allowed}"
        return "remove it"
    if kind == "missing":
        return f"add {loc[-1]} = ..." if loc else "add the key"
    if kind in ("greater_than", "greater_than_equal", "less_than", "less_than_equal"):
        why = WINDOW_LIMITS.get(str(loc[-1])) if loc and kind.startswith("less") else None
        return (
            "give a number "
            + {
                "greater_than": f"> {ctx.get('gt')}",
                "greater_than_equal": f">= {ctx.get('ge')}",
                "less_than": f"< {ctx.get('lt')}",
                "less_than_equal": f"<= {_bound_text(ctx.get('le'))}",
            }[kind]
            + (f" ({why})" if why else "")
        )
    if kind == "literal_error":
        return f"use one of {ctx.get('expected')}"
    if kind in ("string_type", "string_too_short"):
        return "write a non-empty quoted string"
    if kind in ("float_parsing", "float_type", "int_parsing", "int_type", "int_from_float"):
        return "write a plain number (no quotes, no unit)"
    if kind == "finite_number":
        return "write a finite number (nan and inf are not allowed)"
    if kind in ("dict_type", "model_type", "model_attributes_type"):
        return "write a table ({ key = value, ... } or a [section])"
    if kind == "list_type":
        return "write an array of tables ([[...]] entries)"
    if kind == "too_short":
        return "add at least one entry"
    if kind == "bool_type":
        return "write true or false"
    return "see docs/configuration.md"


def _bound_text(bound: Any) -> str:
    """A bound of a range error as written in a plant file (86400, not 86400.0)."""
    if isinstance(bound, float) and bound.is_integer():
        return str(int(bound))
    return str(bound)


def _did_you_mean(word: str, choices: Mapping[str, Any] | Any) -> str:
    close = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.6)
    return f" (did you mean {close[0]!r}?)" if close else ""


def _range(spec: FieldSpec) -> str:
    lo = "-inf" if math.isinf(spec.low) else f"{spec.low:g}"
    hi = "inf" if math.isinf(spec.high) else f"{spec.high:g}"
    unit = "" if spec.unit == "1" else f" {spec.unit}"
    return f"[{lo}, {hi}]{unit}"


def _inverse_or_none(conv: Converter, value_si: float, baro: float) -> float | None:
    if not math.isfinite(value_si):
        return None
    return conv.inverse(value_si, baro if conv.gauge else None)


def _fuel_fix(name: str) -> str:
    return (
        f"check {name}: a gas needs mole fractions of known species (CH4, C2H6, C3H8, "
        "n-C4H10, N2, CO2 ...) that sum to 1; a liquid needs its LHV in J/kg and mass "
        "fractions within 0..1"
    )


def _secret_env_name(path: str, key: str) -> str:
    section = path.split(".", 1)[0] if path else ""
    if section == "broker":
        return "BRAYSCOPE_BROKER_PASSWORD"
    if section == "http" and "read" in key.lower():
        return "BRAYSCOPE_API_READ_TOKEN"
    if section == "http":
        return "BRAYSCOPE_API_TOKEN"
    if section == "database":
        return "BRAYSCOPE_DATABASE_PASSWORD"
    return "the matching BRAYSCOPE_* variable"


def _url_issues(text: str, file: str, key_path: str) -> list[ConfigIssue]:
    """One issue per URL in ``text`` that carries a secret (the secret is never shown)."""
    out: list[ConfigIssue] = []
    for url in urls_in(text):
        where = url_secrets(url)
        if not where:
            continue
        database = key_path in ("database.url", "BRAYSCOPE_DATABASE_URL")
        fix = (
            "remove it from the URL; give the database password with "
            "BRAYSCOPE_DATABASE_PASSWORD, BRAYSCOPE_DATABASE_PASSWORD_FILE or "
            "database.password_file (a file readable only by the daemon), or use "
            "PostgreSQL's password file (PGPASSFILE / ~/.pgpass)"
            if database
            else "remove it from the URL; secrets come from the environment or from files "
            "(see docs/configuration.md, Secrets and environment)"
        )
        out.append(
            ConfigIssue(
                file,
                key_path,
                f"a URL carries a secret in {', '.join(where)} (the value is not shown)",
                fix,
            )
        )
    return out


#: Named SI units of the dimensions that have one in our measurement schema.
_NAMED_SI = {
    "[temperature]": "K",
    "[mass] / [length] / [time] ** 2": "Pa",
    "[mass] / [time]": "kg/s",
    "[length] ** 2 * [mass] / [time] ** 3": "W",
    "dimensionless": "1",
}


def _si_target(uom: str, registry: pint.UnitRegistry[Any]) -> str:
    """The SI unit an auxiliary value of unit ``uom`` is stored in (coherent SI base units;
    K, Pa, kg/s, W and 1 by name).

    Raises
    ------
    daemon.uom.UomError
        ``uom`` is missing or not a unit.
    """
    from daemon.uom import UnknownUnitError

    parsed = parse_uom(uom) if uom and uom.strip() else None
    if parsed is None:
        raise UnknownUnitError(uom, "missing unit of measure", "give the unit, e.g. mm/s")
    try:
        unit = registry.parse_units(parsed.pint_expr)
    except Exception as exc:  # pint raises several types (UndefinedUnitError, token errors)
        raise UnknownUnitError(
            uom, f"unknown unit {uom!r}", "give a pint unit, e.g. mm/s, degC, bar, um, rpm"
        ) from exc
    named = _NAMED_SI.get(str(unit.dimensionality))
    if named is not None:
        return named
    base = registry.Quantity(1.0, unit).to_base_units().units
    return f"{base:~C}" or "1"


def _split_bind(bind: str) -> tuple[str, int]:
    host, sep, port = bind.rpartition(":")
    if not sep or not host or not port.isdigit() or not 0 < int(port) < 65536:
        raise ValueError(f"bind address {bind!r} is not HOST:PORT")
    return host.strip("[]"), int(port)
