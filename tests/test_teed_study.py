"""A study file with a tee (relayset.inputs.teed): reading, the bad-input rules, the schema.

The study is invented (a single-circuit 132 kV line with a branch to a third substation).
Each bad input must give one line naming the file, the field and the value as written and
the rule, exit code 2 and no output (RULES.md).
"""

from __future__ import annotations

import json
import re

import pytest

from relayset.cli import main
from relayset.inputs.study_file import parse_study, read_toml

TEED_TOML = '''
schema = "relayset-study/1"

[study]
line_id = "WV-TEE-1"
title = "Wrenfold - Velmar 132 kV with tee to Oakrest"
from_substation = "Wrenfold"
to_substation = "Velmar"

[system]
nominal_voltage = "132 kV"
frequency = "50 Hz"
earth_resistivity = "100 ohm*m"

[conductor_types.phase]
code = "243-AL1/39-ST1A"
operating_temperature = "75 degC"

[conductor_types.earth]
dc_resistance_20c = "0.43 ohm/km"
outside_diameter = "11.7 mm"
gmr = "4.3 mm"
ac_dc_ratio = 1.0

[[circuits]]
name = "1"
positions = [
  { name = "left",   x = "-5.0 m", height = "21 m", sag = "6 m", conductor = "phase" },
  { name = "middle", x = "0.0 m",  height = "21 m", sag = "6 m", conductor = "phase" },
  { name = "right",  x = "5.0 m",  height = "21 m", sag = "6 m", conductor = "phase" },
]

[[shield_wires]]
x = "0 m"
height = "28 m"
sag = "5 m"
conductor = "earth"

[line]
length = "60 km"
sections = [
  { length = "20 km", order = ["A", "B", "C"] },
  { length = "20 km", order = ["C", "A", "B"] },
  { length = "20 km", order = ["B", "C", "A"] },
]

[tee]
distance = "25 km"
substation = "Oakrest"
sections = [
  { length = "8 km", order = ["A", "B", "C"] },
  { length = "7 km", order = ["B", "C", "A"] },
]

[relay]
end = "all"
ct_ratio = "600/1 A"
vt_ratio = "132000/110 V"

[sources.Wrenfold]
z1 = "1.5 + 12j ohm"
z0 = "2.0 + 20j ohm"

[sources.Velmar]
z1 = "2.5 + 18j ohm"
z0 = "3.0 + 28j ohm"

[sources.Oakrest]
z1 = "4 + 30j ohm"
z0 = "5 + 40j ohm"

[load]
max_apparent_power = "120 MVA"
'''


def write(tmp_path, text: str = TEED_TOML, name: str = "teed.toml"):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def test_teed_study_reads(tmp_path):
    study = parse_study(read_toml(write(tmp_path)))
    assert study.tee.substation == "Oakrest"
    assert study.tee.distance == pytest.approx(25e3, rel=1e-12)  # "25 km" as written
    assert study.tee.length == pytest.approx(15e3, rel=1e-12)
    assert study.relay_ends == ("Wrenfold", "Velmar", "Oakrest")


BAD = [
    # (id, (old, new) text edit, words the one-line message must hold)
    ("tee at the far end", ('distance = "25 km"', 'distance = "60 km"'),
     ['tee.distance = "60 km"', "inside the line"]),
    ("tee beyond the line", ('distance = "25 km"', 'distance = "61 km"'),
     ['tee.distance = "61 km"', "inside the line"]),
    ("tee at the near end", ('distance = "25 km"', 'distance = "0 km"'),
     ['tee.distance = "0 km"', "greater than 0"]),
    ("tee before the line", ('distance = "25 km"', 'distance = "-3 km"'),
     ['tee.distance = "-3 km"', "greater than 0"]),
    ("branch without sections", ('sections = [\n  { length = "8 km", order = ["A", "B", "C"] },'
                                 '\n  { length = "7 km", order = ["B", "C", "A"] },\n]',
                                 "sections = []"),
     ["tee.sections = []", "must not be empty"]),
    ("source at an unknown bus", ("[sources.Oakrest]", "[sources.Oakrist]"),
     ["sources.Oakrist", "names no substation", "Oakrest"]),
    ("relay at an unknown bus", ('end = "all"', 'end = "Oakrist"'),
     ['relay.end = "Oakrist"', "is not an end", "Oakrest"]),
    ("tee to an end of the line", ('substation = "Oakrest"', 'substation = "Velmar"'),
     ['tee.substation = "Velmar"', "third substation"]),
    ("branch section on an unknown tower",
     ('{ length = "7 km", order = ["B", "C", "A"] }',
      '{ length = "7 km", order = ["B", "C", "A"], tower = "lattice" }'),
     ['tee.sections[1].tower = "lattice"', "names no tower"]),
    ("transformer and source at once", ("[load]", 'grounded_transformer_z0 = "1+12j ohm"\n[load]'),
     ["tee.grounded_transformer_z0", "either"]),
    ("tee with a series capacitor", ("[load]", '[[series_capacitors]]\nname = "bank"\n'
                                     'at = "Velmar"\ncompensation_pct = 30\n'
                                     'protective_level = 2.2\nrated_current = "1 kA"\n\n[load]'),
     ['series_capacitors[0].name = "bank"', "series capacitors"]),
]


@pytest.mark.parametrize("case", BAD, ids=[c[0] for c in BAD])
def test_bad_tee_input_is_one_line_and_exit_2(tmp_path, capsys, case):
    _, (old, new), words = case
    assert old in TEED_TOML  # the edit applies
    text = TEED_TOML.replace(old, new, 1)
    if "grounded_transformer_z0" in new:  # the key belongs in [tee]
        text = TEED_TOML.replace('substation = "Oakrest"\n',
                                 'substation = "Oakrest"\ngrounded_transformer_z0 = '
                                 '"1+12j ohm"\n', 1)
    path = write(tmp_path, text)
    out_json = tmp_path / "out.json"
    code = main(["params", str(path), "--json", str(out_json)])
    err = capsys.readouterr().err.strip()
    assert code == 2
    assert len(err.splitlines()) == 1, err
    assert "Traceback" not in err and str(path) in err
    for w in words:
        assert w in err, err
    assert not out_json.exists()


def test_tee_branch_naming_the_untapped_circuit_is_refused(tmp_path, capsys):
    """A tee on a double-circuit line taps circuit 1 (tests/test_teed_lines.py); a branch
    section giving circuit 2 an order is refused."""
    second = TEED_TOML.replace('[[shield_wires]]', '''[[circuits]]
name = "2"
positions = [
  { name = "l2", x = "-5.0 m", height = "31 m", sag = "6 m", conductor = "phase" },
  { name = "m2", x = "0.0 m",  height = "31 m", sag = "6 m", conductor = "phase" },
  { name = "r2", x = "5.0 m",  height = "31 m", sag = "6 m", conductor = "phase" },
]

[[shield_wires]]''').replace('height = "28 m"', 'height = "38 m"')
    second = second.replace('order = ["A", "B", "C"] }', 'order = { "1" = ["A", "B", "C"], '
                            '"2" = ["A", "B", "C"] } }')
    second = second.replace('order = ["C", "A", "B"] }', 'order = { "1" = ["C", "A", "B"], '
                            '"2" = ["C", "A", "B"] } }')
    second = second.replace('order = ["B", "C", "A"] }', 'order = { "1" = ["B", "C", "A"], '
                            '"2" = ["B", "C", "A"] } }')
    code = main(["params", str(write(tmp_path, second))])
    err = capsys.readouterr().err.strip()
    assert code == 2 and len(err.splitlines()) == 1, err
    assert "tee.sections[0].order.2" in err and "tapped circuit" in err, err


def test_schema_covers_the_tee_table(capsys):
    assert main(["schema", "study"]) == 0
    tee = json.loads(capsys.readouterr().out)["properties"]["tee"]
    assert set(tee["required"]) == {"distance", "substation", "sections"}
    assert "grounded_transformer_z0" in tee["properties"]


def _run(text: str):
    from relayset.studies import pipeline
    from relayset.studies.teed import run_teed

    return run_teed(pipeline.load_bytes(text.encode(), "teed.toml"))


def _apparent(res, end, remote, infeed):
    e = next(x for x in res.ends if x.end == end)
    return next(a for a in e.apparent if a.remote == remote and a.infeed == infeed)


def test_teed_reach_without_infeed_equals_the_two_ended_line():
    """Series-only legs (the default) with the third source out: the branch is an open stub
    carrying no current, so the relay measures what it measures on the two-ended line
    (Kirchhoff's laws), here solved by relayset.physics.network (itself checked against
    the nodal reference in tests/test_network.py)."""
    import cmath

    import numpy as np

    from relayset.physics import measurement, network
    from relayset.studies import pipeline
    from relayset.studies.geometry import build_geometry
    from relayset.studies.parameters import compute_parameters
    from relayset.studies.reach import build_source, line_cascade
    from relayset.studies.relay import resolve_relay

    res = _run(TEED_TOML)
    study = pipeline.load_bytes(TEED_TOML.encode(), "teed.toml").study
    geo = build_geometry(study)
    params = compute_parameters(geo)
    relay = resolve_relay(study, params)
    line = line_cascade(geo, params, "actual_plan", False)
    scales = [c.scale for c in study.reach_study.source_cases]
    sw = network.solve_fault_sweep(
        line, build_source(study, "Wrenfold", ""), build_source(study, "Velmar", ""),
        v_nominal_v=132e3, fault_types=study.reach_study.fault_types, m=[1.0],
        r_fault_ohm=[0.0], source_scale=np.array(scales))
    loops = measurement.loop_impedances(sw.v_s, sw.i_s, relay.k0_set)
    rot = cmath.rect(1.0, -cmath.phase(relay.z1_set_ohm))
    vals = [(loops[lp][f] * rot).real for f, ft in enumerate(study.reach_study.fault_types)
            for lp in measurement.loops_for_fault(ft)]
    a = _apparent(res, "Wrenfold", "Velmar", False)
    assert a.min_ohm == pytest.approx(float(np.min(vals)), rel=1e-9)
    assert a.max_ohm == pytest.approx(float(np.max(vals)), rel=1e-9)


def test_teed_zones_follow_the_rules():
    """Zone 1 short of the nearest remote terminal without infeed, zone 2 beyond the
    farthest with infeed (common practice, no source); infeed makes the relay see a fault
    beyond the tee farther away (Kirchhoff's voltage law)."""
    import cmath

    res = _run(TEED_TOML)
    assert [e.end for e in res.ends] == ["Wrenfold", "Velmar", "Oakrest"]
    rot = cmath.rect(1.0, -cmath.phase(res.z1_set_ohm))
    for e in res.ends:
        no_inf = min(a.min_ohm for a in e.apparent if not a.infeed)
        with_inf = max(a.max_ohm for a in e.apparent if a.infeed)
        along1, along2 = (e.zone1_ohm * rot).real, (e.zone2_ohm * rot).real
        assert along1 == pytest.approx(e.zone1_pct / 100 * no_inf, rel=1e-12)
        assert along1 < no_inf and along2 > with_inf
        for remote in {a.remote for a in e.apparent}:
            assert (_apparent(res, e.end, remote, True).min_ohm
                    > _apparent(res, e.end, remote, False).max_ohm)
    assert res.verification == "verified"


def test_teed_checks_say_why_a_rule_cannot_be_met():
    # the tee near Velmar: zone 1 from Wrenfold, short of Oakrest, does not reach the tee
    far_tee = TEED_TOML.replace('distance = "25 km"', 'distance = "55 km"').replace(
        '{ length = "7 km", order = ["B", "C", "A"] },\n', "").replace(
        '{ length = "8 km"', '{ length = "1 km"')
    res = _run(far_tee)
    chk = {c.check_id: c for c in res.ends[0].checks}
    assert not chk["zone1_reaches_tee"].passed
    assert "does not reach the tee" in chk["zone1_reaches_tee"].detail
    # a short line leaving Velmar: zone 2 from Wrenfold would overlap its zone 1
    short_next = TEED_TOML + '''
[[adjacent_lines]]
name = "Velmar - Tarn 132 kV"
z1 = "0.5 + 2j ohm"
bus = "Velmar"
'''
    res = _run(short_next)
    chk = [c for c in res.ends[0].checks if c.check_id == "zone2_short_of_next_zone1"]
    assert len(chk) == 1 and not chk[0].passed
    assert "overlaps" in chk[0].detail and "Velmar - Tarn 132 kV" in chk[0].detail
    long_next = short_next.replace('z1 = "0.5 + 2j ohm"', 'z1 = "20 + 80j ohm"')
    chk = [c for c in _run(long_next).ends[0].checks
           if c.check_id == "zone2_short_of_next_zone1"]
    assert chk[0].passed


def test_grounded_transformer_only_at_the_third_substation():
    text = TEED_TOML.replace('end = "all"', 'end = "Wrenfold"').replace(
        '[sources.Oakrest]\nz1 = "4 + 30j ohm"\nz0 = "5 + 40j ohm"\n', "").replace(
        'substation = "Oakrest"\n', 'substation = "Oakrest"\ngrounded_transformer_z0 = '
        '"1 + 15j ohm"\n')
    res = _run(text)
    assert [e.end for e in res.ends] == ["Wrenfold"]
    # the transformer feeds ground faults only: with it in, the ground loops see Velmar
    # farther (zero-sequence infeed), the phase loops as without it
    a_in, a_out = (_apparent(res, "Wrenfold", "Velmar", inf) for inf in (True, False))
    assert a_in.max_ohm > a_out.max_ohm
    # nothing scales at a bus without a source: its "strong" or "weak" names no case
    # (outside-check finding: the cases read "..., Oakrest strong")
    e = res.ends[0]
    for a in e.apparent:
        assert "Oakrest strong" not in a.min_case + a.max_case
        assert "Oakrest weak" not in a.min_case + a.max_case


def test_export_of_a_teed_line_without_a_profile_is_one_line(tmp_path, capsys):
    """`relayset export` of a teed line (tests/test_teed_export.py) needs a relay profile,
    as a two-ended line's: one line naming relay.profile, exit 2, nothing written."""
    path = write(tmp_path)
    out = tmp_path / "out"
    code = main(["export", str(path), "--output", str(out)])
    err = capsys.readouterr().err.strip()
    assert code == 2 and len(err.splitlines()) == 1, err
    assert f"{path}: relay.profile: " in err and "names no relay profile" in err
    assert not out.exists() or not any(out.iterdir())


def test_settings_of_a_teed_line_prints_writes_json_and_says_failed_checks(tmp_path, capsys):
    out_json = tmp_path / "teed.json"
    assert main(["settings", str(write(tmp_path)), "--json", str(out_json)]) == 0
    text = capsys.readouterr().out
    assert "Relay at Oakrest" in text and "Verdict: verified" in text
    data = json.loads(out_json.read_text(encoding="utf-8"))["teed"]
    assert [e["end"] for e in data["ends"]] == ["Wrenfold", "Velmar", "Oakrest"]
    # secondary = primary x CT ratio / VT ratio (600 / 1200), relayset.physics.zones
    e = data["ends"][0]
    assert abs(complex(*e["zone1_secondary_ohm"])) == pytest.approx(
        abs(complex(*e["zone1_ohm"])) * 600 / 1200, rel=1e-12)
    # a failed check (zone 2 over a short next line): outputs written, exit code 3
    short_next = TEED_TOML + '''
[[adjacent_lines]]
name = "Velmar - Tarn 132 kV"
z1 = "0.5 + 2j ohm"
bus = "Velmar"
'''
    out2 = tmp_path / "teed2.json"
    assert main(["settings", str(write(tmp_path, short_next, "t2.toml")), "--json",
                 str(out2)]) == 3
    assert "[FAIL] zone2_short_of_next_zone1" in capsys.readouterr().out
    assert json.loads(out2.read_text(encoding="utf-8"))["teed"]["verification"] == \
        "failed checks"


def test_teed_settings_refuse_bad_input_and_run_teed_a_two_ended_study(tmp_path, capsys):
    from relayset.errors import InputError
    from relayset.studies import pipeline
    from relayset.studies.teed import run_teed

    bad = write(tmp_path, TEED_TOML.replace('distance = "25 km"', 'distance = "90 km"'))
    out_json = tmp_path / "x.json"
    assert main(["settings", str(bad), "--json", str(out_json)]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and 'tee.distance = "90 km"' in err
    assert not out_json.exists()
    plain = TEED_TOML.split("[tee]")[0] + "[relay]" + TEED_TOML.split("[relay]")[1]
    plain = plain.replace('end = "all"', 'end = "Wrenfold"').replace(
        '[sources.Oakrest]\nz1 = "4 + 30j ohm"\nz0 = "5 + 40j ohm"\n', "")
    with pytest.raises(InputError, match=r"no \[tee\] table"):
        run_teed(pipeline.load(write(tmp_path, plain, "plain.toml")))


def test_time_graded_zone2_is_not_held_short_of_the_next_zone1(tmp_path):
    """With zone2.grading = "time_graded" the philosophy does not ask zone 2 to stay short
    of the next zone 1: both the rule's check and the simulated one say so and pass."""
    from relayset.studies import pipeline
    from relayset.studies.teed import run_teed

    (tmp_path / "graded.toml").write_text(
        '[zone2]\ngrading = "time_graded"\n'
        "check_adjacent_zone1 = false\n", encoding="utf-8")
    text = TEED_TOML.replace('to_substation = "Velmar"\n',
                             'to_substation = "Velmar"\nphilosophy = "graded.toml"\n') + '''
[[adjacent_lines]]
name = "Velmar - Tarn 132 kV"
z1 = "0.5 + 2j ohm"
bus = "Velmar"
'''
    res = run_teed(pipeline.load(write(tmp_path, text)))
    chk = {c.check_id: c for c in res.ends[0].all_checks}
    assert chk["zone2_short_of_next_zone1"].passed
    assert "time graded" in chk["zone2_short_of_next_zone1"].detail
    assert chk["zone2_stays_short_of_next_zone1"].passed
    assert "time graded" in chk["zone2_stays_short_of_next_zone1"].detail


def test_params_of_a_teed_line_say_what_they_cover(tmp_path, capsys):
    assert main(["params", str(write(tmp_path))]) == 0
    out = " ".join(capsys.readouterr().out.split())
    assert ("these parameters are of the line from Wrenfold to Velmar; the branch from the "
            "tee at 25 km to Oakrest (15 km)") in out


def test_teed_zone2_covers_the_largest_infeed_of_independent_source_strengths():
    """Reviewer's finding: the infeed ratio I_C/I_A = (Z_SA + Z_A)/(Z_SC + Z_C) is largest
    with the relay's own source weak and the third terminal's strong, a case the uniform
    source cases (all strong, all weak) never form. As in the two-ended verification, each
    bus takes every uniform case independently. Kirchhoff (textbook, three-phase fault at
    Velmar, no load): Z_app = Z_A + Z_B (1 + I_C/I_A), with the legs' Z1 of the result and
    the file's source impedances, Wrenfold weak (x2) and Oakrest strong (x0.5); zone 2 at
    Wrenfold must reach past it along the line angle."""
    import cmath

    res = _run(TEED_TOML)
    (z_a, _), (z_b, _), (z_c, _) = [(z1, z0) for _, z1, z0 in res.legs]
    ratio = (2 * (1.5 + 12j) + z_a) / (0.5 * (4 + 30j) + z_c)
    z_app = z_a + z_b * (1 + ratio)
    rot = cmath.rect(1.0, -cmath.phase(res.z1_set_ohm))
    e = next(x for x in res.ends if x.end == "Wrenfold")
    assert (z_app * rot).real == pytest.approx(51.0, abs=0.5)  # the hand value
    assert (e.zone2_ohm * rot).real > (z_app * rot).real
    a = _apparent(res, "Wrenfold", "Velmar", True)
    assert a.max_ohm >= (z_app * rot).real  # the ground loops see more (zero-sequence infeed)
    assert "Wrenfold weak" in a.max_case and "Oakrest strong" in a.max_case


def test_relay_at_a_grounded_transformer_only_terminal_is_refused_without_a_dead_end(
        tmp_path, capsys):
    # The third substation with only a grounded-star transformer: a relay there is refused
    # in one line that names what is there and the ends a relay may name; the message must
    # not ask for a [sources.Oakrest] table, which is refused beside the transformer
    # (RULES.md: one line naming the field, the value as written and the rule).
    text = TEED_TOML.replace(
        '[sources.Oakrest]\nz1 = "4 + 30j ohm"\nz0 = "5 + 40j ohm"\n', "").replace(
        'substation = "Oakrest"\n', 'substation = "Oakrest"\ngrounded_transformer_z0 = '
        '"1 + 15j ohm"\n')
    out_json = tmp_path / "x.json"
    assert main(["settings", str(write(tmp_path, text)), "--json", str(out_json)]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1, err
    assert 'relay.end = "all"' in err and "grounded-star transformer" in err
    assert "'Wrenfold' or 'Velmar'" in err
    assert "[sources." not in err
    assert not out_json.exists()


def test_both_on_a_teed_line_means_the_two_ends_of_the_line(tmp_path):
    # With no source at the third substation (a grounded transformer only) no relay sits
    # there; "both" studies the relays at the line's two ends together.
    text = TEED_TOML.replace('end = "all"', 'end = "both"', 1)
    text = text.replace('substation = "Oakrest"\n',
                        'substation = "Oakrest"\ngrounded_transformer_z0 = "1+12j ohm"\n', 1)
    text = re.sub(r"\[sources\.Oakrest\][^\[]*", "", text)
    from relayset.studies import pipeline
    from relayset.studies.teed import run_teed

    study = parse_study(read_toml(write(tmp_path, text)))
    assert study.relay_ends == ("Wrenfold", "Velmar")
    r = run_teed(pipeline.load_bytes(text.encode(), "teed.toml"))
    assert [e.end for e in r.ends] == ["Wrenfold", "Velmar"]


def test_teed_cases_are_named_in_the_study_phase_labels():
    """A study naming its phases R, S, T reads its teed cases in R, S, T, as every
    two-ended output does (outside-check finding: the teed settings and verification printed
    the internal A, B, C names, which invites a wrong mapping to the relay's phases)."""
    import re

    text = TEED_TOML.replace('name = "1"\n', 'name = "1"\nphase_labels = ["R", "S", "T"]\n', 1)
    text = re.sub(r'order = \[([^\]]*)\]',
                  lambda m: "order = [" + m.group(1).replace('"A"', '"R"').replace(
                      '"B"', '"S"').replace('"C"', '"T"') + "]", text)
    assert text.count('"R"') >= 3
    res = _run(text)
    words = [a.min_case for e in res.ends for a in e.apparent]
    words += [c.detail for e in res.ends for c in e.all_checks]
    joined = " ".join(words)
    assert "loop R-G" in joined and "fault R-S" in joined
    # no internal name (AG, BC, ABG, ...) as a fault type or loop
    assert not re.search(r"\b(fault|loop) [ABC]{1,3}G?\b", joined), joined[:400]
