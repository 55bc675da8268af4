r"""Secondary-injection test points of the zones as set, and the files a test set plays.

For every relay end, zone and kind of loop (phase, ground), points just inside (95 %) and
just outside (105 %) the zone's boundary along rays through the origin: the line
(characteristic) angle, and for a quadrilateral the middle of each side that is not the
directional line (reactance line, tilted or not, and both resistive blinders); for a mho
circle the diameter and ±30° from it. The boundary along a ray is the zone's one
characteristic object's (``ZoneSetting.characteristic(...).reach_along``); nothing here
re-derives a shape.

Expected result: of all zones of that end whose characteristic (for that kind of loop)
holds the point, the one with the shortest delay operates after its delay (an inner zone
operates first); none: no operation.

Test-set convention (the shot's secondary phasors; SI, phase A of the prefault voltage
at 0°; common practice, no source):

- prefault: balanced nominal voltages :math:`V_n = V_{nom}/(\sqrt3\,n_{VT})`, no current;
- test current :math:`I_t` the CT's rated secondary current (1 A where the study gives
  only a ratio), lowered where the loop voltage would exceed 80 % of nominal (a shot whose
  current falls below the relay model's minimum operating current expects no operation);
- ground loop X: only phase X carries current, :math:`I_X = I_t e^{j(\angle V_{X,pre} -
  \angle Z(1+k_0))}`, so :math:`I_{res} = I_X` and
  :math:`V_X = Z\,(I_X + k_0 I_{res})` (the relay's own k0); healthy phases at nominal;
- phase loop XY (two-phase injection): :math:`I_X = -I_Y = I_t e^{j(\angle V_{XY,pre} -
  \angle Z)}`, :math:`V_{X,Y} = -V_H/2 \pm Z I_X` with the healthy phase H at nominal, so
  :math:`(V_X - V_Y)/(I_X - I_Y) = Z`;

with :math:`Z = Z_{pri}\,n_{CT}/n_{VT}` the secondary impedance (the settings' one
secondary factor per end). The relay's loop impedance computed back from these phasors
(:func:`relayset.physics.measurement.loop_impedances`) is the target point.
"""

from __future__ import annotations

import cmath
import math
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

SCHEMA = "relayset-test-points/1"

#: Inside and outside the boundary, as a fraction of the reach along the ray [1].
FACTORS = (("in", 0.95), ("out", 1.05))
#: A mho's rays: the diameter and this far to either side of it [rad].
MHO_SIDE_RAD = math.radians(30.0)
#: The loop voltage a shot may reach, as a fraction of nominal (common practice, no source).
VOLTAGE_LIMIT = 0.8
#: Test current where the study gives only a CT ratio [A secondary].
DEFAULT_TEST_CURRENT_A = 1.0

_GROUND = ("AG", "BG", "CG")
_PHASE = ("AB", "BC", "CA")
_A = cmath.exp(2j * math.pi / 3)
#: Balanced unit phasors A, B, C (A at 0°).
_BALANCED = np.array([1.0, _A ** 2, _A], dtype=complex)
_EDGE_NAMES = ("reactance line", "right blinder", "left blinder")
#: The ray names' parts of a shot id (distinct: ids become file names).
_RAY_IDS = {"line angle": "line", "diameter": "diam", "diameter +30 deg": "diam-plus30",
            "diameter -30 deg": "diam-minus30", "reactance line": "xline",
            "right blinder": "rblinder", "left blinder": "lblinder"}


@dataclass(frozen=True)
class TestShot:
    """One secondary-injection shot of one loop (SI, secondary phasors, A at 0°)."""

    __test__ = False  # not a pytest class

    shot_id: str  #: safe file stem, unique within the end
    end: str  #: the relay's substation (user text: escape where shown)
    zone: str  #: the zone whose boundary the point tests
    loop: str  #: "AG" .. "CA" (relay phases A, B, C)
    ground: bool
    ray: str  #: which ray: "line angle", "reactance line", ...
    side: str  #: "in" or "out"
    fraction: float  #: of the reach along the ray [1]
    ray_angle_rad: float
    z_primary_ohm: complex
    z_secondary_ohm: complex
    expected_zone: str | None  #: None: no operation
    expected_delay_s: float | None
    v_pre: np.ndarray  #: (3,) prefault phase voltages [V secondary]
    v: np.ndarray  #: (3,) fault phase voltages [V secondary]
    i: np.ndarray  #: (3,) fault phase currents [A secondary]
    k0: complex  #: the relay's residual compensation the shot is formed with

    @property
    def expected(self) -> str:
        """The expected result in words."""
        if self.expected_zone is None:
            return "no operation"
        return f"operate {self.expected_zone} after {self.expected_delay_s:g} s"


def _polar(z: complex) -> list[float]:
    return [abs(z), math.degrees(cmath.phase(z)) if z != 0 else 0.0]


def loop_phasors(loop: str, z_sec: complex, k0: complex, v_nom: float, i_rated: float
                 ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Prefault and fault phasors of one shot under the module's test-set convention.

    Parameters
    ----------
    loop : str
        "AG", "BG", "CG", "AB", "BC" or "CA".
    z_sec : complex
        Target loop impedance [ohm secondary].
    k0 : complex
        Residual compensation the relay uses [1].
    v_nom : float
        Nominal phase voltage [V secondary].
    i_rated : float
        Test current before the voltage limit [A secondary].

    Returns
    -------
    v_pre, v, i : (3,) complex arrays
        Prefault voltages [V], fault voltages [V], fault currents [A].
    """
    v_pre = v_nom * _BALANCED
    v = v_pre.copy()
    i = np.zeros(3, dtype=complex)
    if loop in _GROUND:
        x = _GROUND.index(loop)
        zl = z_sec * (1 + k0)
        it = min(i_rated, VOLTAGE_LIMIT * v_nom / abs(zl)) if zl != 0 else i_rated
        i[x] = it * cmath.exp(1j * (cmath.phase(v_pre[x]) - cmath.phase(zl)))
        v[x] = z_sec * (i[x] + k0 * i.sum())
    else:
        x, y = {"AB": (0, 1), "BC": (1, 2), "CA": (2, 0)}[loop]
        h = 3 - x - y
        it = (min(i_rated, VOLTAGE_LIMIT * math.sqrt(3) * v_nom / (2 * abs(z_sec)))
              if z_sec != 0 else i_rated)
        ix = it * cmath.exp(1j * (cmath.phase(v_pre[x] - v_pre[y]) - cmath.phase(z_sec)))
        i[x], i[y] = ix, -ix
        v[x] = -v_pre[h] / 2 + z_sec * ix
        v[y] = -v_pre[h] / 2 - z_sec * ix
    return v_pre, v, i


def _rays(ch) -> list[tuple[str, float]]:
    """(name, angle) of the rays a characteristic is tested along [rad]."""
    from relayset.physics.characteristic import REVERSE, Mho

    if isinstance(ch, Mho):
        phi = ch.angle_rad
        return [("diameter", phi), ("diameter +30 deg", phi + MHO_SIDE_RAD),
                ("diameter -30 deg", phi - MHO_SIDE_RAD)]
    flip = math.pi if ch.direction == REVERSE else 0.0
    rays = [("line angle", ch.line_angle_rad + flip)]
    pts = ch.outline()
    planes = ch.halfplanes()
    for k in range(len(pts)):
        mid = 0.5 * (pts[k] + pts[(k + 1) % len(pts)])
        fwd = -mid if ch.direction == REVERSE else mid
        for name, (nx, ny, c) in zip(_EDGE_NAMES, planes[:3], strict=True):
            if c > 0 and abs(nx * fwd.real + ny * fwd.imag - c) <= 1e-9 * max(c, 1.0):
                rays.append((name, cmath.phase(mid)))
                break
    return rays


def _slug(text: str, n: int = 40) -> str:
    return re.sub(r"[^A-Za-z0-9]+", "-", text).strip("-")[:n].strip("-") or "end"


def end_stem(index: int, end: str, study_stem: str = "") -> str:
    """Safe file stem of a relay end: the study's report stem (line id and revision, so
    several studies can share a folder), the end's position and its name's safe characters.
    """
    lead = f"{study_stem}-" if study_stem else ""
    return f"{lead}end{index + 1}-{_slug(end)}"


@dataclass(frozen=True)
class EndBasis:
    """What the shots of one relay end are formed with (SI, secondary)."""

    end: str
    stem: str
    secondary_factor: float
    v_nom: float  #: nominal phase voltage [V secondary]
    i_test: float  #: test current before the voltage limit [A secondary]
    ct_ratio: float
    vt_ratio: float
    k0: complex
    frequency_hz: float
    z_source_ohm: complex | None  #: the source behind the relay (its X/R: the DC offset)
    phase_labels: tuple[str, ...]
    #: the relay model's minimum operating current in each phase of a loop [A secondary]
    min_current_a: float = 0.0
    #: mutual compensation of the relay (double circuit), None without
    k0m: complex | None = None


def end_bases(results) -> list[EndBasis]:
    """The basis of every relay end of a study with settings."""
    from relayset.inputs.study_file import parse_study
    from relayset.report.context import safe_stem

    study = parse_study(results.input, results.source_file)
    doc_stem = safe_stem(results.study["line_id"], results.study["revision"])
    labels = tuple(study.circuits[0].phase_labels)
    out = []
    for n, s in enumerate(results.settings or ()):
        ct, vt = study.relay.ratios(s.end)
        primary = getattr(ct, "primary_a", None)
        i_test = primary / float(ct) if primary else DEFAULT_TEST_CURRENT_A
        zs = next((x.z_source_ohm for x in s.sources if x.role == "relay"), None)
        model = ((results.verification.relay_model or {}).get(s.end, {})
                 if results.verification is not None else {})
        i_min = float(model.get("min_operating_current_secondary_a") or 0.0)
        # as the verification's relay: k0m where the double circuit's relay compensates
        mutual = len(study.circuits) == 2 and study.reach_study.mutual_compensation
        out.append(EndBasis(s.end, end_stem(n, s.end, doc_stem), s.secondary_factor,
                            results.parameters.v_nominal_v / (math.sqrt(3) * vt), i_test,
                            float(ct), float(vt), complex(s.k0.k0),
                            results.parameters.frequency_hz, zs, labels, i_min,
                            complex(s.k0m) if mutual and s.k0m is not None else None))
    return out


def _expected(zones, z: complex, ground: bool, theta: float) -> tuple[str | None, float | None]:
    hit = [(zs.delay_s, k, zs.zone) for k, zs in enumerate(zones)
           if bool(zs.characteristic(ground, theta).contains(z))]
    if not hit:
        return None, None
    delay, _, name = min(hit)
    return name, delay


def test_shots(settings, basis: EndBasis) -> list[TestShot]:
    """Every test shot of one relay end.

    Parameters
    ----------
    settings : SettingsResult
        The zones of the end.
    basis : EndBasis
        Ratios, nominal voltage, test current and k0 of the end.

    Returns
    -------
    list of TestShot
        Ordered by zone, kind of loop (phase first), ray, side, loop.
    """
    theta = settings.line_angle_rad
    shots: list[TestShot] = []
    seen: set[str] = set()
    for zs in settings.zones:
        for ground in (False, True):
            ch = zs.characteristic(ground, theta)
            for ray, psi in _rays(ch):
                reach = float(ch.reach_along(psi))
                if not reach > 0 or not math.isfinite(reach):
                    continue
                for side, f in FACTORS:
                    z = f * reach * cmath.exp(1j * psi)
                    ez, ed = _expected(settings.zones, z, ground, theta)
                    z_sec = z * basis.secondary_factor
                    for loop in (_GROUND if ground else _PHASE):
                        v_pre, v, i = loop_phasors(loop, z_sec, basis.k0, basis.v_nom,
                                                   basis.i_test)
                        # below the relay's minimum operating current nothing operates
                        low = np.abs(i).max() < basis.min_current_a
                        sid = f"{basis.stem}-{zs.zone}-{loop}-{_RAY_IDS[ray]}-{side}"
                        if sid in seen:  # two edges of one name: never one file for both
                            sid = f"{sid}-{len(shots)}"
                        seen.add(sid)
                        shots.append(TestShot(sid, settings.end, zs.zone, loop, ground, ray,
                                              side, f, psi, z, z_sec, None if low else ez,
                                              None if low else ed, v_pre, v, i,
                                              basis.k0))
    return shots


def _label(loop: str, labels: tuple[str, ...]) -> str:
    """A loop in the study's phase labels: "AG" -> "L1-G", "AB" -> "L1-L2"."""
    names = [labels["ABC".index(c)] if c in "ABC" else "G" for c in loop]
    return "-".join(names)


def shot_record(s: TestShot, labels: tuple[str, ...]) -> dict[str, Any]:
    """The JSON record of one shot (magnitudes and angles in degrees)."""
    names = ("A", "B", "C")
    return {
        "shot_id": s.shot_id, "zone": s.zone, "loop": _label(s.loop, labels),
        "loop_kind": "ground" if s.ground else "phase", "ray": s.ray, "side": s.side,
        "fraction_of_reach": s.fraction, "ray_angle_deg": math.degrees(s.ray_angle_rad),
        "z_primary_ohm": [s.z_primary_ohm.real, s.z_primary_ohm.imag],
        "z_secondary_ohm": [s.z_secondary_ohm.real, s.z_secondary_ohm.imag],
        "expected": {"zone": s.expected_zone, "delay_s": s.expected_delay_s,
                     "text": s.expected},
        "prefault_v_secondary": {labels[k]: _polar(s.v_pre[k]) for k in range(3)},
        "v_secondary": {labels[k]: _polar(s.v[k]) for k in range(3)},
        "i_secondary": {labels[k]: _polar(s.i[k]) for k in range(3)},
        "phases": dict(zip(names, labels, strict=True)),
    }


_CSV_HEADER = ("shot_id", "zone", "loop", "loop_kind", "ray", "side", "fraction_of_reach",
               "z_primary_r_ohm", "z_primary_x_ohm", "z_secondary_r_ohm", "z_secondary_x_ohm",
               "expected_zone", "expected_delay_s",
               "va_v", "va_deg", "vb_v", "vb_deg", "vc_v", "vc_deg",
               "ia_a", "ia_deg", "ib_a", "ib_deg", "ic_a", "ic_deg")


def shots_csv(shots: list[TestShot], labels: tuple[str, ...]) -> bytes:
    """The shots as CSV (RFC 4180, UTF-8 with BOM; user text neutralised)."""
    import csv
    import io as _io

    from relayset import io

    def n(x: float) -> str:
        return format(float(x), f".{io.CSV_DIGITS}g")

    buf = _io.StringIO()
    w = csv.writer(buf, lineterminator="\r\n")
    w.writerow(_CSV_HEADER)
    for s in shots:
        ph = []
        for arr in (s.v, s.i):
            for k in range(3):
                m, a = _polar(arr[k])
                ph += [n(m), n(a)]
        w.writerow([s.shot_id, s.zone, io.spreadsheet_text(_label(s.loop, labels)),
                    "ground" if s.ground else "phase", s.ray, s.side, n(s.fraction),
                    n(s.z_primary_ohm.real), n(s.z_primary_ohm.imag),
                    n(s.z_secondary_ohm.real), n(s.z_secondary_ohm.imag),
                    s.expected_zone or "none",
                    "" if s.expected_delay_s is None else n(s.expected_delay_s), *ph])
    return io.csv_bytes(buf.getvalue())


def shots_json(shots: list[TestShot], basis: EndBasis, results) -> dict[str, Any]:
    """The ``relayset-test-points/1`` document of one relay end."""
    return {
        "schema": SCHEMA,
        "line_id": results.study.get("line_id"),
        "revision": results.study.get("revision"),
        "end": basis.end,
        "source_sha256": results.source_sha256,
        "convention": {
            "units": "secondary volts and amperes, phasors as [rms magnitude, angle deg], "
                     "phase A prefault voltage at 0 deg",
            "prefault": "balanced nominal voltages, no current",
            "test_current_a": basis.i_test,
            "voltage_limit_of_nominal": VOLTAGE_LIMIT,
            "ground_loops": "current in the faulted phase only; V = Z (I + k0 I_res)",
            "phase_loops": "two-phase injection I_X = -I_Y; V_X - V_Y = 2 Z I_X; healthy "
                           "phase at nominal",
            "points": "95 % (in) and 105 % (out) of the zone's reach along each ray",
            "expected": "the zone with the shortest delay whose characteristic holds the "
                        "point, for that kind of loop",
        },
        "nominal_phase_voltage_v": basis.v_nom,
        "ct_ratio": basis.ct_ratio,
        "vt_ratio": basis.vt_ratio,
        "secondary_factor": basis.secondary_factor,
        "k0": [basis.k0.real, basis.k0.imag],
        "frequency_hz": basis.frequency_hz,
        "shots": [shot_record(s, basis.phase_labels) for s in shots],
    }


def table_rows(shots: list[TestShot]) -> list[dict[str, str]]:
    """Compact rows for the report: one per zone, kind of loop and ray, with the point
    inside and the point outside (the three loops of a kind share the points)."""
    from relayset.settings.context import ZONE_LABELS

    rows: dict[tuple, dict[str, str]] = {}
    for s in shots:
        key = (s.zone, s.ground, s.ray)
        row = rows.setdefault(key, {"zone": ZONE_LABELS.get(s.zone, s.zone),
                                    "kind": "ground" if s.ground else "phase",
                                    "ray": s.ray})
        row[s.side] = (f"{abs(s.z_secondary_ohm):.4g} \u2220 "
                       f"{math.degrees(cmath.phase(s.z_secondary_ohm)):.1f}\u00b0")
        row[f"{s.side}_pct"] = f"{s.fraction * 100:.0f}"
        row[f"{s.side}_expected"] = (
            "no operation" if s.expected_zone is None else
            f"{ZONE_LABELS.get(s.expected_zone, s.expected_zone)}, {s.expected_delay_s:g} s")
    return list(rows.values())


def test_points_schema() -> dict[str, Any]:
    """JSON Schema (draft 2020-12) of the ``relayset-test-points/1`` file."""
    num = {"type": "number"}
    pair = {"type": "array", "items": num, "minItems": 2, "maxItems": 2}
    phasors = {"type": "object", "minProperties": 3, "maxProperties": 3,
               "additionalProperties": pair}
    shot = {
        "type": "object", "additionalProperties": False,
        "required": ["shot_id", "zone", "loop", "loop_kind", "ray", "side",
                     "fraction_of_reach", "ray_angle_deg", "z_primary_ohm",
                     "z_secondary_ohm", "expected", "prefault_v_secondary", "v_secondary",
                     "i_secondary", "phases"],
        "properties": {
            "shot_id": {"type": "string", "pattern": "^[A-Za-z0-9._-]+$"},
            "zone": {"enum": ["zone1", "zone2", "zone3", "reverse"]},
            "loop": {"type": "string"}, "loop_kind": {"enum": ["phase", "ground"]},
            "ray": {"enum": sorted(_RAY_IDS)}, "side": {"enum": ["in", "out"]},
            "fraction_of_reach": num, "ray_angle_deg": num,
            "z_primary_ohm": pair, "z_secondary_ohm": pair,
            "expected": {"type": "object", "required": ["zone", "delay_s", "text"],
                         "additionalProperties": False,
                         "properties": {"zone": {"type": ["string", "null"]},
                                        "delay_s": {"type": ["number", "null"]},
                                        "text": {"type": "string"}}},
            "prefault_v_secondary": phasors, "v_secondary": phasors, "i_secondary": phasors,
            "phases": {"type": "object", "additionalProperties": {"type": "string"}},
        }}
    case = {"type": "object", "required": ["id", "kind", "description"],
            "properties": {"id": {"type": "string", "pattern": "^[A-Za-z0-9._-]+$"},
                           "kind": {"enum": ["test shot", "governing case"]},
                           "description": {"type": "string"},
                           "verification_case": {"type": "object"},
                           "phasors_secondary": {
                               "type": "object", "additionalProperties": False,
                               "required": ["prefault_v", "prefault_i", "v", "i"],
                               "properties": {
                                   "prefault_v": phasors, "prefault_i": phasors,
                                   "v": phasors, "i": phasors,
                                   "in_parallel_prefault": pair, "in_parallel": pair}}}}
    return {
        "$schema": "https://json-schema.org/draft/2020-12/schema",
        "$id": "https://relayset.invalid/schemas/test-points.json",
        "title": "relayset test points", "type": "object",
        "required": ["schema", "end", "source_sha256", "convention", "shots", "comtrade",
                     "nominal_phase_voltage_v", "ct_ratio", "vt_ratio", "k0",
                     "frequency_hz"],
        "properties": {
            "schema": {"const": SCHEMA}, "end": {"type": "string"},
            "line_id": {"type": ["string", "null"]}, "revision": {"type": ["string", "null"]},
            "source_sha256": {"type": "string", "pattern": "^[0-9a-f]{64}$"},
            "convention": {"type": "object"}, "nominal_phase_voltage_v": num,
            "ct_ratio": num, "vt_ratio": num, "secondary_factor": num, "k0": pair,
            "frequency_hz": num, "shots": {"type": "array", "items": shot},
            "comtrade": {"type": "object", "required": ["standard", "folder", "cases"],
                         "properties": {"cases": {"type": "array", "items": case}}},
        },
    }


def export_test_cases(results, out_dir: Path, *, sample_rate_hz: float = 4000.0,
                      duration_s: float = 0.5) -> list[Path]:
    """Write the test points and COMTRADE cases of every relay end (see
    :func:`shot_and_case_files`; all or none, the user's umask)."""
    from relayset import io

    outputs = shot_and_case_files(results, out_dir, sample_rate_hz=sample_rate_hz,
                              duration_s=duration_s)
    io.write_all(outputs)
    return [p for _, p, _ in outputs]


def shot_and_case_files(results, out_dir: Path, *, sample_rate_hz: float = 4000.0,
                    duration_s: float = 0.5) -> list[tuple[str, Path, bytes]]:
    """The test points (CSV, JSON) and the COMTRADE cases of every relay end, formed, not
    written: (kind, path, bytes) as :func:`relayset.io.write_all` takes them.

    Files: ``OUT/<end stem>-test-points.csv|json`` and
    ``OUT/comtrade/<end stem>/<shot or case id>.cfg|dat``, the end stem
    ``<line id>_rev<revision>-end<N>-<end name's safe characters>``.

    Parameters
    ----------
    results : StudyResults
        A study with settings (and, for the governing cases, its verification).
    out_dir : pathlib.Path
        Folder to write into (created).
    sample_rate_hz : float
        COMTRADE sampling rate [Hz].
    duration_s : float
        COMTRADE record length [s] (longer where a shot's delay needs it).

    Returns
    -------
    list of (str, pathlib.Path, bytes)
        What each file is, where it goes, its bytes.
    """
    from relayset.export import comtrade

    out_dir = Path(out_dir)
    outputs: list[tuple[str, Path, bytes]] = []
    solver = comtrade.case_solver(results)  # shared by the ends (line, sources, load flow)
    for basis, settings in zip(end_bases(results), results.settings or (), strict=True):
        outputs += end_files(results, settings, basis, out_dir,
                             comtrade.governing_cases(results, settings, basis, solver),
                             sample_rate_hz=sample_rate_hz, duration_s=duration_s)
    return outputs


def end_files(results, settings, basis, out_dir: Path, governing: list, *,
              sample_rate_hz: float, duration_s: float, formed_from: str | None = None
              ) -> list[tuple[str, Path, bytes]]:
    """One relay end's test points (CSV, JSON) and COMTRADE cases, formed, not written:
    the shots of ``settings``, then the ``governing`` cases (the two-ended verification's,
    or a teed end's); ``formed_from`` says how those were formed, in the manifest."""
    from relayset import io
    from relayset.export import comtrade

    shots = test_shots(settings, basis)
    out = [("test points", out_dir / f"{basis.stem}-test-points.csv",
            shots_csv(shots, basis.phase_labels))]
    cases = comtrade.shot_cases(shots, basis) + governing
    doc = shots_json(shots, basis, results)
    doc["comtrade"] = comtrade.manifest(cases, basis, sample_rate_hz=sample_rate_hz,
                                        duration_s=duration_s)
    if formed_from is not None:
        doc["comtrade"]["governing_cases_formed_from"] = formed_from
    out.append(("test points", out_dir / f"{basis.stem}-test-points.json",
                io.to_json(doc).encode()))
    folder = out_dir / "comtrade" / basis.stem
    out += [("COMTRADE", folder / name, data)
            for name, data in comtrade.render(cases, basis, sample_rate_hz=sample_rate_hz,
                                              duration_s=duration_s)]
    return out


def report_tables(results) -> list[dict[str, Any]]:
    """Per relay end, the compact test-point rows the report prints."""
    if not results.settings:
        return []
    out = []
    for basis, settings in zip(end_bases(results), results.settings, strict=True):
        out.append({"end": basis.end, "i_test": f"{basis.i_test:g}",
                    "v_nom": f"{basis.v_nom:.4g}",
                    "rows": table_rows(test_shots(settings, basis))})
    return out
