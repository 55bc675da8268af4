"""Every secondary value equals primary × the secondary factor, wherever it is shown.

Z_sec = Z_pri · n_CT / n_VT (the impedance a relay measures through its CT and VT;
Blackburn & Domin, Protective Relaying: Principles and Applications, from memory; also the
README's settings section). The factor is worked out here from the study's own ratio text,
per relay end, independently of relayset's unit parser; the study has different ratios at
its two ends, so a value converted with the other end's factor fails too. Checked in the
JSON export (every ``*_secondary_*`` key beside its ``*_primary_*`` key), in the report's
HTML and in the fleet register (its rows and its CSV).
"""

from __future__ import annotations

import csv
import io
import math
import re

import pytest

import relayset
from relayset.resources import demo_lines_dir

DEMO = demo_lines_dir() / "greyholt_ivel_400kv_twin.toml"
REMOTE = "Ivel Moor"
AT_REMOTE = {"ct_ratio": "1000/1 A", "vt_ratio": "380000/100 V"}  # not Greyholt's ratios


def _ratio(text: str) -> float:
    a, b = re.match(r"\s*([\d.]+)\s*/\s*([\d.]+)", text).groups()
    return float(a) / float(b)


@pytest.fixture(scope="module")
def case(tmp_path_factory):
    """The 400 kV demo with a relay at both ends, written to a file (the report reads it)."""
    study = relayset.Study.from_file(DEMO)
    phil = DEMO.parent / study.tables["study"]["philosophy"]
    study = (study.replace("study.philosophy", str(phil)).replace("relay.end", "both")
             .replace(f'relay.at."{REMOTE}"', AT_REMOTE)
             .replace("adjacent_lines[0].bus", REMOTE))
    path = tmp_path_factory.mktemp("secondary") / "both_ends.toml"
    path.write_text(study.to_toml(), "utf-8")
    relay = study.tables["relay"]
    factor = {end: _ratio(relay.get("at", {}).get(end, {}).get("ct_ratio", relay["ct_ratio"]))
              / _ratio(relay.get("at", {}).get(end, {}).get("vt_ratio", relay["vt_ratio"]))
              for end in study.model.ends}
    assert factor["Greyholt"] == pytest.approx(2000 / (400000 / 110), rel=1e-15)
    assert factor[REMOTE] == pytest.approx(1000 / 3800, rel=1e-15)
    return path, relayset.study_settings(path), factor


def _pairs(d, prefix=""):
    """(path, primary, secondary) for every *secondary* key of a JSON object."""
    for k, v in d.items():
        if isinstance(v, dict):
            yield from _pairs(v, f"{prefix}{k}.")
        elif "secondary" in k and k != "secondary_factor":
            yield f"{prefix}{k}", d[k.replace("secondary", "primary")], v


def _c(v):
    return None if v is None else complex(*v) if isinstance(v, list) else complex(v)


def test_json(case):
    _, res, factor = case
    ends = res.to_dict()["settings"]["ends"]
    assert {e["end"] for e in ends} == set(factor)
    seen = 0
    for e in ends:
        f = factor[e["end"]]
        assert e["line"]["secondary_factor"] == pytest.approx(f, rel=1e-12)
        for path, pri, sec in _pairs(e):
            if pri is None:
                assert sec is None, path
                continue
            assert abs(_c(sec) - _c(pri) * f) <= 1e-12 * abs(_c(pri) * f), (e["end"], path)
            seen += 1
    # per end: line Z1, the load; per quadrilateral zone: reach, its magnitude, X, R phase, R ground
    assert seen == 2 * (2 + 4 * 5)


def _num(text: str) -> float:
    return float(text.replace("\u2212", "-").strip())


def test_report(case):
    """The report prints 3 decimals: each secondary value within rounding of primary × f."""
    from relayset.report.build import make_report

    _, res, factor = case
    html = make_report(res, pdf_renderer=lambda *a: b"").html
    sections = re.findall(r'<section class="chapter" id="settings-\d+">(.*?)</section>', html,
                          re.S)
    assert len(sections) == 2
    for sec in sections:
        end = re.search(r"Settings: relay at ([^<]+)</h2>", sec).group(1)
        f = factor[end]
        pairs = []
        m = re.search(r"\(([^()]+) Ω\), [^()]+ Ω secondary \(([^()]+) Ω\)", sec)
        pairs.append(m.groups())  # line Z1 magnitudes
        pairs += re.findall(r'\((?:forward|reverse)\)</td><td class="n">[^<]*</td>'
                            r'<td class="n">([^<]*)</td><td class="n">([^<]*)</td>', sec)
        pairs += re.findall(r"<td class=\"n\">([^<]+)<br>([^<]+)</td>", sec)
        pairs += re.findall(r"primary / secondary</th><td class=\"n\">([^<]+) / ([^<]+) Ω",
                            sec)
        assert len(pairs) >= 1 + 4 + 4 * 3 + 1, end
        for pri, sec_text in pairs:
            expected = _num(pri) * f
            # both printed at 3 decimals: half a unit in the last place each, scaled
            assert abs(_num(sec_text) - expected) <= 0.0005 * (1 + f) + 1e-9, (end, pri)


def test_register(case):
    from relayset.fleet.register import register_csv, rows_from_results

    _, res, factor = case
    rows = rows_from_results(res.to_dict(), results_file="r.json", report_file=None)
    table = list(csv.DictReader(io.StringIO(register_csv(rows).lstrip("\ufeff"))))
    assert {r["end"] for r in table} == set(factor)
    for row in [*rows, *table]:
        f = factor[row["end"]]
        for zone in ("zone1", "zone2", "zone3", "reverse"):
            pri, sec = float(row[f"{zone}_primary_ohm"]), float(row[f"{zone}_secondary_ohm"])
            assert math.isclose(sec, pri * f, rel_tol=1e-11), (row["end"], zone)
