"""Relay profiles (``relayset-relay-profile/1``): what a relay type can be set to.

A utility writes one profile per relay type: its nominal current, the characteristic shapes
it offers, whether a quadrilateral's reactance line can be tilted, the form of residual
compensation it takes, and for every setting the utility's own label and the range and step
in secondary units. A study names it with ``[relay] profile = "PATH"`` (relative to the
study file). The setting identifiers and their units are fixed by relayset
(:data:`SETTING_UNITS`); the grid of a setting is the multiples of its step within
``[min, max]``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from relayset.errors import InputError

#: The schema string a profile file carries.
PROFILE_SCHEMA = "relayset-relay-profile/1"

ZONES = ("zone1", "zone2", "zone3", "reverse")

#: What each zone setting is and its unit (secondary values).
ZONE_SETTINGS = {
    "reach": "ohm",  # mho: circle diameter; quadrilateral: reactance reach
    "resistive_phase": "ohm",  # quadrilateral right blinder, phase loops
    "resistive_ground": "ohm",  # quadrilateral right blinder, ground loops
    "resistive_left_phase": "ohm",  # left blinder where it differs from the right one
    "resistive_left_ground": "ohm",
    "reactance_tilt": "deg",  # quadrilateral reactance-line tilt
    "characteristic_angle": "deg",  # mho characteristic angle
    "delay": "s",
}

#: Residual-compensation settings per form the relay takes.
K0_FORMS = {
    "magnitude_angle": {"k0.magnitude": "1", "k0.angle": "deg"},
    "resistive_reactive": {"k0.resistive": "1", "k0.reactive": "1"},
    "z0_over_z1": {"k0.z0_z1_magnitude": "1", "k0.z0_z1_angle": "deg"},
}

#: Every setting identifier a profile may give, with its unit (stable identifiers of the
#: setting file).
SETTING_UNITS: dict[str, str] = {
    **{f"{z}.{k}": u for z in ZONES for k, u in ZONE_SETTINGS.items()},
    **{k: u for form in K0_FORMS.values() for k, u in form.items()},
    "min_operating_current": "A",
}

SHAPES = ("mho", "quadrilateral")
_TOP_KEYS = ("schema", "name", "nominal_current", "characteristics", "reactance_tilt",
             "residual_compensation", "settings")
_SETTING_KEYS = ("label", "min", "max", "step")


@dataclass(frozen=True)
class SettingRange:
    """One setting of a profile: the utility's label, range and step [secondary unit]."""

    setting_id: str
    label: str
    min: float
    max: float
    step: float

    @property
    def unit(self) -> str:
        return SETTING_UNITS[self.setting_id]


@dataclass(frozen=True)
class RelayProfile:
    """A validated relay profile (``relayset-relay-profile/1``)."""

    source: str  #: the file, for messages
    sha256: str  #: of the file's bytes
    name: str
    nominal_current_a: float  #: 1 or 5 [A]
    characteristics: tuple[str, ...]
    reactance_tilt: bool
    residual_compensation: str  #: a key of :data:`K0_FORMS`
    settings: dict[str, SettingRange]

    def setting(self, setting_id: str, why: str) -> SettingRange:
        """The profile's setting ``setting_id``; InputError naming the profile if it lacks
        it (``why`` says what needs it)."""
        s = self.settings.get(setting_id)
        if s is None:
            raise InputError(f"the profile has no such setting, and {why} needs it",
                             field=f'settings."{setting_id}"', source=self.source)
        return s


def _number(v: Any, source: str, field: str) -> float:
    if isinstance(v, bool) or not isinstance(v, int | float) or not math.isfinite(v):
        raise InputError("must be a finite number", field=field, value=v, source=source)
    return float(v)


def profile_from_dict(data: dict[str, Any], source: str, sha256: str = "") -> RelayProfile:
    """Validate the tables of a profile file; InputError with the first defect."""
    schema = data.get("schema")
    if schema != PROFILE_SCHEMA:
        raise InputError(f'must be "{PROFILE_SCHEMA}": this file is not a relay profile',
                         field="schema", value=schema, source=source)
    for k in data:
        if k not in _TOP_KEYS:
            raise InputError(f"unknown key; a profile has {', '.join(_TOP_KEYS)}",
                             field=k, source=source)
    name = data.get("name", "")
    if not isinstance(name, str) or not 0 < len(name) <= 200:
        raise InputError("must be text of 1 to 200 characters", field="name", value=name,
                         source=source)
    nominal = data.get("nominal_current")
    if nominal not in ("1 A", "5 A"):
        raise InputError('must be "1 A" or "5 A"', field="nominal_current", value=nominal,
                         source=source)
    chars = data.get("characteristics")
    if (not isinstance(chars, list) or not chars or len(set(map(str, chars))) != len(chars)
            or any(c not in SHAPES for c in chars)):
        raise InputError(f"must list one or more of {', '.join(SHAPES)}, each once",
                         field="characteristics", value=chars, source=source)
    tilt = data.get("reactance_tilt", False)
    if not isinstance(tilt, bool):
        raise InputError("must be true or false", field="reactance_tilt", value=tilt,
                         source=source)
    form = data.get("residual_compensation")
    if form not in K0_FORMS:
        raise InputError(f"must be one of {', '.join(K0_FORMS)}",
                         field="residual_compensation", value=form, source=source)
    table = data.get("settings")
    if not isinstance(table, dict) or not table:
        raise InputError("must be a table of settings", field="settings", source=source)
    settings: dict[str, SettingRange] = {}
    labels: dict[str, str] = {}
    for sid, s in table.items():
        where = f'settings."{sid}"'
        if sid not in SETTING_UNITS:
            raise InputError("not a setting relayset knows (see relayset schema profile)",
                             field=where, source=source)
        if not isinstance(s, dict):
            raise InputError("must be a table with label, min, max and step", field=where,
                             source=source)
        for k in s:
            if k not in _SETTING_KEYS:
                raise InputError(f"unknown key; a setting has {', '.join(_SETTING_KEYS)}",
                                 field=f"{where}.{k}", source=source)
        for k in _SETTING_KEYS:
            if k not in s:
                raise InputError("missing", field=f"{where}.{k}", source=source)
        label = s["label"]
        if not isinstance(label, str) or not 0 < len(label.strip()) <= 60:
            raise InputError("must be text of 1 to 60 characters", field=f"{where}.label",
                             value=label, source=source)
        if label in labels:
            raise InputError(f'already the label of settings."{labels[label]}": each '
                             "setting needs its own label", field=f"{where}.label",
                             value=label, source=source)
        labels[label] = sid
        lo = _number(s["min"], source, f"{where}.min")
        hi = _number(s["max"], source, f"{where}.max")
        step = _number(s["step"], source, f"{where}.step")
        if step <= 0:
            raise InputError("must be greater than 0", field=f"{where}.step", value=s["step"],
                             source=source)
        if hi < lo:
            raise InputError(f"is below min = {s['min']}: the range is upside down",
                             field=f"{where}.max", value=s["max"], source=source)
        settings[sid] = SettingRange(sid, label, lo, hi, step)
    return RelayProfile(source, sha256, name, float(nominal.split()[0]), tuple(chars), tilt,
                        form, settings)


def load_profile(path: str | Path) -> RelayProfile:
    """Read and validate a relay profile file.

    Raises
    ------
    InputError
        The file is missing or not TOML, is not a profile, or breaks a rule.
    """
    import hashlib

    from relayset.inputs.study_file import loads_toml, read_at_most

    source = str(path)
    try:
        raw = read_at_most(Path(path), source)
    except FileNotFoundError:
        raise InputError("relay profile file not found", source=source) from None
    except OSError as exc:
        raise InputError(f"cannot read the relay profile ({exc.strerror})",
                         source=source) from None
    return profile_from_dict(loads_toml(raw, source), source, hashlib.sha256(raw).hexdigest())


def shipped_profiles() -> dict[str, Path]:
    """The invented generic profiles shipped with relayset, by name (file name less .toml)."""
    from relayset.resources import demo_lines_dir

    return {p.stem: p for p in sorted((demo_lines_dir() / "profiles").glob("*.toml"))}


def is_shipped_name(profile: str) -> bool:
    """Whether ``relay.profile`` names a shipped profile (a bare name, no .toml, no folder)
    rather than a file (a path ending in .toml)."""
    return not profile.lower().endswith(".toml") and not any(c in profile for c in "/\\")


def study_profile(profile: str | None, study_source: str) -> RelayProfile | None:
    """The profile a study names, or None: a file (a path ending in .toml, relative to the
    study file) or, by a bare name, one of relayset's shipped generic profiles."""
    if profile is None:
        return None
    if is_shipped_name(profile):
        shipped = shipped_profiles()
        if profile not in shipped:
            raise InputError("neither a profile file (a path ending in .toml) nor a shipped "
                             f"profile ({', '.join(shipped)})", field="relay.profile",
                             value=profile, source=study_source)
        return load_profile(shipped[profile])
    path = Path(profile)
    if not path.is_absolute():
        path = Path(study_source).parent / path
    if not path.is_file():
        raise InputError("relay profile file does not exist", field="relay.profile",
                         value=profile, source=study_source)
    return load_profile(path)


def with_profile(text: str, profile: str) -> str:
    """A study's text with ``relay.profile`` set to ``profile`` (a copy elsewhere: verify's
    private folder, a register's effective study). The edit is textual, comments and
    layout kept, and the result is parsed again to prove that only that value changed.

    Raises
    ------
    ValueError
        The study has no ``profile`` key in a ``[relay]`` table written as such.
    """
    import json
    import re
    import tomllib

    lines = text.splitlines(keepends=True)
    head = next((i for i, ln in enumerate(lines)
                 if re.match(r"""\s*\[\s*(relay|"relay"|'relay')\s*\]\s*(#.*)?$""", ln)), None)
    if head is None:
        raise ValueError("no [relay] table")
    end = next((i for i in range(head + 1, len(lines)) if re.match(r"\s*\[", lines[i])),
               len(lines))
    pat = re.compile(r"""\s*(profile|"profile"|'profile')\s*=""")
    hit = next((i for i in range(head + 1, end) if pat.match(lines[i])), None)
    if hit is None:
        raise ValueError("no relay.profile")
    lines[hit] = f"profile = {json.dumps(profile)}\n"
    new = "".join(lines)
    before, after = tomllib.loads(text), tomllib.loads(new)
    after["relay"]["profile"] = before["relay"]["profile"]
    if after != before:
        raise ValueError("relay.profile could not be replaced alone")
    return new
