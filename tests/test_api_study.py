"""Studies in memory (relayset.Study): the same parsing, checks and one-line errors as a
study file on the command line, and results equal to those of the file."""

from __future__ import annotations

import itertools
import subprocess
import sys
import tomllib

import numpy as np
import pytest

import relayset

DEMO = "ashcombe_brenwick_132kv.toml"
CLI = "import sys; from relayset.cli import main; sys.exit(main(sys.argv[1:]))"


def _params(res):
    d = res.to_dict()
    return d["parameters"]


def test_from_file_toml_dict_give_the_file_results(demo_path):
    path = demo_path(DEMO)
    text = path.read_text("utf-8")
    by_path = relayset.study_parameters(path)
    from_file = relayset.Study.from_file(path)
    from_toml = relayset.Study.from_toml(text, name=str(path))
    # Same bytes, same hash as the file (the archive's identity of an input).
    assert from_toml.sha256 == from_file.sha256 == by_path.source_sha256
    assert relayset.study_parameters(from_file).to_dict() == by_path.to_dict()
    assert relayset.study_parameters(from_toml).to_dict() == by_path.to_dict()
    # from_dict writes the tables as TOML and reads them back: same parameters.
    from_dict = relayset.Study.from_dict(tomllib.loads(text), name=str(path))
    assert _params(relayset.study_parameters(from_dict)) == _params(by_path)
    assert tomllib.loads(from_dict.to_toml()) == tomllib.loads(text)


def test_replace_equals_a_variant_file(demo_path, variant):
    """A replaced value gives what the same edit written to a file gives on disk."""
    study = relayset.Study.from_file(demo_path(DEMO))
    new = study.replace("system.earth_resistivity", "300 ohm*m").replace(
        "system.earth_resistivity_range", None)

    def edit(d):
        d["system"]["earth_resistivity"] = "300 ohm*m"
        del d["system"]["earth_resistivity_range"]

    on_disk = relayset.study_parameters(variant(DEMO, edit))
    in_memory = relayset.study_parameters(new)
    assert in_memory.parameters.earth_resistivity_ohm_m == 300.0
    assert _params(in_memory) == _params(on_disk)
    assert study.tables["system"]["earth_resistivity"] != "300 ohm*m"  # the original is kept
    # Nested fields and list entries, as a message writes them.
    lower = study.replace("circuits[0].positions[0].height", "15 m")
    assert lower.model.circuits[0].positions[0].height == 15.0


def test_resistivity_sweep_in_memory_reads_no_file(demo_path):
    """The issue's notebook check: a 50-value sweep in memory opens no file."""
    study = relayset.Study.from_file(demo_path(DEMO)).replace(
        "system.earth_resistivity_range", None)
    opened: list[str] = []
    watching = [True]

    def hook(event, args):
        if watching[0] and event == "open":
            opened.append(str(args[0]))

    sys.addaudithook(hook)  # cannot be removed: switched off below
    try:
        z0 = [relayset.study_parameters(
            study.replace("system.earth_resistivity", f"{rho} ohm*m")
        ).parameters.circuits[0].z0_ohm_per_m for rho in range(10, 1010, 20)]
    finally:
        watching[0] = False
    assert opened == []
    assert len(z0) == 50
    # Carson: the earth-return resistance grows and the zero-sequence reactance grows with
    # resistivity (the equivalent return depth 658.5 sqrt(rho/f) m; Anderson, Analysis of
    # Faulted Power Systems, ch. 4, from memory): monotone in rho.
    x0 = [z.imag for z in z0]
    assert all(b > a for a, b in itertools.pairwise(x0))


@pytest.mark.parametrize(("field", "value", "rule_part"), [
    ("system.earth_resistivity", "-3 ohm*m", "must be at least 0.1 ohm*m"),
    ("system.frequency", "55 Hz", "must be 50 Hz or 60 Hz"),
    ("system.earth_resistivty", "3 ohm*m", "unknown key"),
])
def test_errors_are_the_command_lines(demo_path, variant, field, value, rule_part):
    """StudyError's message is the line the command line prints for the same file, and
    its attributes are its parts (field and value as written)."""
    study = relayset.Study.from_file(demo_path(DEMO))
    table, key = field.split(".")
    path = variant(DEMO, lambda d: d[table].__setitem__(key, value), "bad.toml")
    cli = subprocess.run([sys.executable, "-c", CLI, "params", str(path)],
                         capture_output=True, text=True)
    assert cli.returncode == 2
    line = cli.stderr.strip().removeprefix("relayset: error: ")
    with pytest.raises(relayset.StudyError) as info:
        relayset.Study.from_toml(path.read_bytes(), name=str(path))
    err = info.value
    assert str(err) == line
    assert (err.file, err.field, err.value) == (str(path), field, f'"{value}"')
    assert rule_part in err.rule and "Traceback" not in cli.stderr
    with pytest.raises(relayset.StudyError) as info:
        study.replace(field, value)
    assert info.value.field == field and info.value.value == f'"{value}"'
    assert isinstance(info.value, relayset.InputError)


def test_errors_of_paths_and_values(demo_path, tmp_path):
    study = relayset.Study.from_file(demo_path(DEMO))
    with pytest.raises(relayset.StudyError, match=r"has no circuits\[5\] to replace"):
        study.replace("circuits[5].name", "x")
    with pytest.raises(relayset.StudyError, match="is not a field path"):
        study.replace("system..frequency", 50)
    with pytest.raises(relayset.StudyError) as info:
        study.replace("sources.Ashcombe.z1", 1 + 2j)
    assert info.value.value == "1+2j" and "(1+2j)" not in str(info.value)
    with pytest.raises(relayset.StudyError) as info:
        relayset.study_parameters(tmp_path / "missing.toml")
    assert info.value.rule == "file does not exist"
    with pytest.raises(relayset.StudyError, match="is not valid TOML"):
        relayset.Study.from_toml("[system\n", name="mine.toml")


def test_numpy_values_are_numbers(demo_path):
    study = relayset.Study.from_file(demo_path(DEMO))
    s = study.replace("reach_study.location_step_pct", np.int64(5))
    assert s.model.reach_study.location_step_pct == 5.0
    s = study.replace("reach_study.fault_resistances", np.array(["0 ohm", "2.5 ohm"]))
    assert s.tables["reach_study"]["fault_resistances"] == ["0 ohm", "2.5 ohm"]
    with pytest.raises(relayset.StudyError) as info:  # a number where a unit is needed
        study.replace("reach_study.fault_resistances", np.array([0.0, 2.5]))
    assert info.value.value == "0.0" and "float64" not in str(info.value)


def test_settings_from_a_study_in_memory(demo_path):
    study = relayset.Study.from_file(demo_path("kessler_oxbow_115kv.toml"))
    res = relayset.study_settings(study)
    assert res.settings is not None and res.verification is not None
