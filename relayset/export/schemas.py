"""JSON Schemas (draft 2020-12) of relayset's files, built from the one definition of each.

``relayset schema NAME`` prints one. The study file and the philosophy are TOML; their
schemas describe the TOML tables as parsed (a TOML file converted to JSON validates). The
profile and the setting file are relayset's own formats and are described in full; the
results schema fixes the top-level shape and the settable values.
"""

from __future__ import annotations

import dataclasses
from typing import Any

DRAFT = "https://json-schema.org/draft/2020-12/schema"
_BASE = "https://relayset.invalid/schemas/"

_NUM = {"type": "number"}
_STR = {"type": "string"}


def _tables(cls) -> dict[str, Any]:
    """Properties of a declared input table: its TOML keys, any value (checked by relayset)."""
    return {f.metadata.get("key") or f.name: {} for f in dataclasses.fields(cls)}


def study_schema() -> dict[str, Any]:
    """The study file (``relayset-study/1``) as TOML tables."""
    from relayset.inputs.study_file import Study

    props = _tables(Study)
    props["schema"] = {"const": "relayset-study/1"}
    props["relay"] = {"type": "object", "properties": {"profile": _STR}}
    from relayset.inputs.cable import json_schema as cables_schema

    props["cables"] = cables_schema()
    props["neighbours"] = _neighbours()
    props["series_capacitors"] = _series_capacitors()
    props["tee"] = _tee_schema()
    return {"$schema": DRAFT, "$id": _BASE + "study.json", "title": "relayset study file",
            "type": "object", "required": ["schema", "study", "system", "line"],
            "properties": props, "additionalProperties": False}


def _neighbours() -> dict[str, Any]:
    """``[[neighbours]]``: the neighbouring lines in shared corridors (their keys; the
    values are checked by relayset)."""
    from relayset.inputs.study_file import MAX_NEIGHBOURS, Neighbour

    return {"type": "array", "maxItems": MAX_NEIGHBOURS, "items": {
        "type": "object", "required": ["name"],
        "anyOf": [{"required": ["positions", "buses"]}, {"required": ["study"]}],
        "properties": {**_tables(Neighbour),
                       "positions": {"type": "array", "minItems": 3, "maxItems": 3,
                                     "items": {"type": "object"}},
                       "buses": {"type": "array", "minItems": 2, "maxItems": 2,
                                 "items": {"type": "string", "minLength": 1}},
                       "sections": {"type": "array", "minItems": 1,
                                    "items": {"type": "integer", "minimum": 0}},
                       "sources": {"type": "object",
                                   "additionalProperties": {"type": "object"}}},
        "additionalProperties": False}}


def _series_capacitors() -> dict[str, Any]:
    """``[[series_capacitors]]``: banks at a bus (``at``) or mid-line (``distance`` from
    ``measured_from``), sized by ``compensation_pct`` or ``reactance``, with the varistor's
    protective level (relayset.inputs.series_capacitor)."""
    from relayset.inputs.series_capacitor import MAX_SERIES_CAPACITORS, SeriesCapacitor

    props = _tables(SeriesCapacitor)
    props.update(name=_STR, at=_STR, measured_from=_STR, distance=_STR, reactance=_STR,
                 rated_current=_STR, protective_level_current=_STR,
                 compensation_pct={"type": "number", "exclusiveMinimum": 0, "maximum": 100},
                 protective_level={"type": "number", "minimum": 1, "maximum": 5},
                 vt_side={"enum": ["bus", "line"]})
    bank = {"type": "object", "properties": props, "additionalProperties": False,
            "oneOf": [{"required": ["at"]}, {"required": ["distance", "measured_from"]}]}
    return {"type": "array", "maxItems": MAX_SERIES_CAPACITORS, "items": bank}


def _tee_schema() -> dict[str, Any]:
    """``[tee]`` (relayset.inputs.teed): its keys, the required ones, sections as a list."""
    from relayset.inputs.teed import TeeData

    keys = _tables(TeeData)
    keys["sections"] = {"type": "array", "minItems": 1, "items": {"type": "object"}}
    return {"type": "object", "required": ["distance", "substation", "sections"],
            "properties": keys, "additionalProperties": False}


def philosophy_schema() -> dict[str, Any]:
    """The setting philosophy as TOML tables (partial files take the defaults)."""
    from relayset.inputs.philosophy import Philosophy

    props = {k: {"type": "object"} for k in _tables(Philosophy)}
    props["schema"] = {"type": "string"}
    return {"$schema": DRAFT, "$id": _BASE + "philosophy.json",
            "title": "relayset setting philosophy", "type": "object",
            "properties": props, "additionalProperties": False}


def profile_schema() -> dict[str, Any]:
    """The relay profile (``relayset-relay-profile/1``)."""
    from relayset.inputs.profile import K0_FORMS, PROFILE_SCHEMA, SETTING_UNITS, SHAPES

    setting = {"type": "object", "required": ["label", "min", "max", "step"],
               "additionalProperties": False,
               "properties": {"label": {"type": "string", "minLength": 1, "maxLength": 60},
                              "min": _NUM, "max": _NUM,
                              "step": {"type": "number", "exclusiveMinimum": 0}}}
    return {
        "$schema": DRAFT, "$id": _BASE + "profile.json", "title": "relayset relay profile",
        "type": "object", "additionalProperties": False,
        "required": ["schema", "name", "nominal_current", "characteristics",
                     "residual_compensation", "settings"],
        "properties": {
            "schema": {"const": PROFILE_SCHEMA},
            "name": {"type": "string", "minLength": 1, "maxLength": 200},
            "nominal_current": {"enum": ["1 A", "5 A"]},
            "characteristics": {"type": "array", "minItems": 1, "uniqueItems": True,
                                "items": {"enum": list(SHAPES)}},
            "reactance_tilt": {"type": "boolean"},
            "residual_compensation": {"enum": list(K0_FORMS)},
            "settings": {"type": "object", "minProperties": 1,
                         "propertyNames": {"enum": list(SETTING_UNITS)},
                         "additionalProperties": setting},
        },
    }


def _settable_value() -> dict[str, Any]:
    from relayset.inputs.profile import SETTING_UNITS
    from relayset.settings.settable import ROUNDING

    return {"type": "object", "additionalProperties": False,
            "required": ["id", "label", "unit", "ideal", "settable", "difference", "primary",
                         "range", "step", "direction", "rule", "in_range", "on_grid"],
            "properties": {
                "id": {"enum": list(SETTING_UNITS)}, "label": _STR,
                "unit": {"enum": sorted(set(SETTING_UNITS.values()))},
                "ideal": _NUM, "settable": _NUM, "difference": _NUM, "primary": _NUM,
                "range": {"type": "array", "prefixItems": [_NUM, _NUM], "minItems": 2,
                          "maxItems": 2},
                "step": {"type": "number", "exclusiveMinimum": 0},
                "direction": {"enum": sorted({d for d, _ in ROUNDING.values()})},
                "rule": _STR, "in_range": {"type": "boolean"},
                "on_grid": {"type": "boolean"}}}


def _sha() -> dict[str, Any]:
    return {"type": "string", "pattern": "^[0-9a-f]{64}$"}


def results_schema() -> dict[str, Any]:
    """The results JSON (``relayset settings --json``, the report's ``.json``)."""
    profile = {"type": "object", "additionalProperties": False,
               "required": ["name", "sha256", "residual_compensation"],
               "properties": {"name": _STR, "sha256": _sha(),
                              "residual_compensation": _STR}}
    end = {"type": "object", "required": ["end", "remote_end", "line", "k0", "zones"],
           "properties": {"end": _STR, "remote_end": _STR,
                          "zones": {"type": "object"},
                          "settable": {"type": "object", "additionalProperties": False,
                                       "required": ["profile", "values"],
                                       "properties": {"profile": profile, "values": {
                                           "type": "array", "items": _settable_value()}}}}}
    return {
        "$schema": DRAFT, "$id": _BASE + "results.json", "title": "relayset results",
        "type": "object",
        "required": ["relayset_version", "source_file", "source_sha256", "study",
                     "parameters"],
        "properties": {
            "relayset_version": _STR, "source_file": _STR, "source_sha256": _sha(),
            "study": {"type": "object", "required": ["line_id", "revision"]},
            "parameters": {"type": "object"},
            "settings": {"type": ["object", "null"],
                         "properties": {"ends": {"type": "array", "items": end}}},
            "verification": {"type": ["object", "null"]},
            "teed": _teed_results(),
            "teed_reach": _teed_reach_results(),
        },
    }


def _teed_reach_results() -> dict[str, Any]:
    """A three-terminal line's reach study (relayset.results.teed_reach, ``relayset
    reach``): the top-level keys, per end its paths."""
    path = {"type": "object",
            "required": ["remote", "third", "infeed", "length_km", "tee_location_pct",
                         "z1_path_ohm", "worst_bolted_overreach_at_remote_terminal_pct",
                         "worst_bolted_overreach_on_path_pct",
                         "worst_bolted_underreach_on_path_pct",
                         "worst_untransposition_overreach_on_path_pct",
                         "worst_untransposition_underreach_on_path_pct",
                         "apparent_at_tee_ohm", "apparent_at_remote_terminal_ohm", "loops",
                         "envelope", "parallel_circuit", "mutual_compensation"],
            "properties": {"remote": _STR, "third": _STR, "infeed": {"type": "boolean"},
                           "parallel_circuit": {"type": ["string", "null"]},
                           "mutual_compensation": {"type": "boolean"},
                           "loops": {"type": "array", "minItems": 6, "maxItems": 6}}}
    end = {"type": "object",
           "required": ["end", "z1_set_ohm", "k0_set", "k0m_set", "tee_ohm", "paths"],
           "properties": {"end": _STR, "paths": {"type": "array", "items": path}}}
    return {"type": ["object", "null"],
            "required": ["buses", "tee_distance_km", "branch_length_km", "fault_types",
                         "source_cases", "cases_solved", "ends", "notes"],
            "properties": {"buses": {"type": "array", "items": _STR, "minItems": 3,
                                     "maxItems": 3},
                           "ends": {"type": "array", "items": end}}}


def _teed_results() -> dict[str, Any]:
    """A three-terminal line's results (relayset.results.teed.TeedStudyResult.to_dict)."""
    check = {"type": "object", "required": ["check_id", "passed", "detail"],
             "properties": {"check_id": _STR, "passed": {"type": "boolean"},
                            "detail": _STR, "judged": {"type": "boolean"}}}
    cplx = {"type": "array", "items": _NUM, "minItems": 2, "maxItems": 2}
    end = {"type": "object",
           "required": ["end", "apparent", "tee_ohm", "zone1_pct", "zone1_ohm", "zone2_ohm",
                        "zone1_secondary_ohm", "zone2_secondary_ohm", "zone1_rule",
                        "zone2_rule", "checks", "verification_checks"],
           "properties": {"end": _STR, "zone1_ohm": cplx, "zone2_ohm": cplx,
                          "zone1_secondary_ohm": cplx, "zone2_secondary_ohm": cplx,
                          "checks": {"type": "array", "items": check},
                          "verification_checks": {"type": "array", "items": check}}}
    return {"type": ["object", "null"],
            "required": ["buses", "tee_distance_m", "branch_length_m", "z1_set_ohm",
                         "k0_set", "ends", "legs", "assumptions", "verification"],
            "properties": {"buses": {"type": "array", "items": _STR, "minItems": 3,
                                     "maxItems": 3},
                           "ends": {"type": "array", "items": end},
                           "verification": {"enum": ["verified",
                                                     "verified with accepted deviations",
                                                     "failed checks"]}}}


def settings_file_schema() -> dict[str, Any]:
    """The neutral setting file of one relay end (``relayset-settings/1``)."""
    from relayset.export.setting_file import SETTINGS_SCHEMA

    record = _settable_value()
    record = {**record, "required": [*record["required"], "secondary", "value"],
              "properties": {**record["properties"], "secondary": _NUM, "value": _NUM}}
    return {
        "$schema": DRAFT, "$id": _BASE + "settings.json",
        "title": "relayset setting file of one relay end", "type": "object",
        "additionalProperties": False,
        "required": ["schema", "relayset_version", "line_id", "revision", "relay_end",
                     "remote_end", "ct_ratio", "vt_ratio", "profile", "study_sha256",
                     "results_sha256", "verdict", "settings"],
        "properties": {
            "schema": {"const": SETTINGS_SCHEMA}, "relayset_version": _STR,
            "line_id": _STR, "revision": {"type": ["string", "integer"]},
            "relay_end": _STR, "remote_end": _STR,
            "ct_ratio": {"type": "number", "exclusiveMinimum": 0},
            "vt_ratio": {"type": "number", "exclusiveMinimum": 0},
            "profile": results_schema()["properties"]["settings"]["properties"]["ends"][
                "items"]["properties"]["settable"]["properties"]["profile"],
            "study_sha256": _sha(), "results_sha256": _sha(),
            "verdict": _STR,
            "settings": {"type": "array", "minItems": 1, "items": record},
        },
    }


#: ``relayset schema NAME``: the schemas by name.
def test_points_schema() -> dict[str, Any]:
    """The test-point file ``relayset-test-points/1`` (:mod:`relayset.export.testshots`)."""
    from relayset.export.testshots import test_points_schema as schema

    return schema()


SCHEMAS = {"study": study_schema, "philosophy": philosophy_schema, "profile": profile_schema,
           "results": results_schema, "settings": settings_file_schema,
           "test-points": test_points_schema}
