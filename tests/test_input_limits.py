"""Input size limits (relayset/inputs/limits.py): each refused with one line, exit code 2.

The limits are the project's own rule (no outside source): hostile or broken files must be
refused before they cost memory or time. The reproducers are the files that used to crash
or exhaust memory: brackets 500 deep (RecursionError in the TOML reader), one dotted key of
100 000 parts (memory growing with the square of the parts: 7.9 GB for 200 KB), a million
sections. The hostile files also run in a subprocess under a 1.5 GB address-space cap, so
that a regression shows as a crash rather than as a slow machine. Timings are measured in
the report of the change, not asserted here (speed lives in tests/benchmarks/).
"""

from __future__ import annotations

import os
import resource
import subprocess
import sys
import tomllib
import warnings
from pathlib import Path

import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from relayset.cli import main
from relayset.inputs import limits
from relayset.inputs.toml_depth import nesting_depth
from relayset.resources import demo_lines_dir

from tomlwrite import dump_toml

DEMO_1C = "ashcombe_brenwick_132kv.toml"
MEMORY_CAP = 1536 * 1024 * 1024  # [bytes]
_CLI = "import sys; from relayset.cli import main; sys.exit(main(sys.argv[1:]))"


def _demo() -> dict:
    return tomllib.loads((demo_lines_dir() / DEMO_1C).read_text("utf-8"))


def refused(capsys, path: Path, *words: str, command: str = "params") -> str:
    """Run the command in-process: exit 2, one line naming the file and ``words``."""
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        code = main([command, str(path)])
    cap = capsys.readouterr()
    err = cap.err.strip()
    assert code == 2, err
    assert len(err.splitlines()) == 1 and len(err) <= 300, err
    assert err.startswith(f"relayset: error: {path}: "), err
    assert "Traceback" not in err and not cap.out, err
    assert not [w for w in caught if issubclass(w.category, RuntimeWarning)]
    for w in words:
        assert w in err, (w, err)
    return err


def _capped_cli(path: Path, command: str = "params") -> subprocess.CompletedProcess:
    def cap():
        resource.setrlimit(resource.RLIMIT_AS, (MEMORY_CAP, MEMORY_CAP))

    # The timeout only keeps a regression from hanging the suite (not a speed check).
    return subprocess.run([sys.executable, "-c", _CLI, command, str(path)],
                          capture_output=True, text=True, preexec_fn=cap, timeout=120,
                          env=dict(os.environ))


# -- hostile text: refused before (or instead of) the TOML reader ---------------------------

HOSTILE = {
    # name: (text, words in the message)
    "brackets 500 deep": ("x = " + "[" * 500 + "]" * 500 + "\n", ["x:", "levels deep"]),
    "brackets 300 000 deep": ("x = " + "[" * 300_000 + "\n", ["x:", "levels deep"]),
    "inline tables 500 deep": ("x = " + "{a = " * 500 + "1" + "}" * 500 + "\n",
                               ["levels deep"]),
    "one dotted key of 100 000 parts": ("a" + ".a" * 100_000 + " = 1\n",
                                        ["a.a.a", "levels deep", "line 1"]),
    "many distinct dotted keys": ("".join(f"k{i}" + ".a" * 40 + " = 1\n" for i in range(4000)),
                                  ["k0.a.a", "levels deep"]),
    "table header 50 000 parts": ("[" + ".".join(["t"] * 50_000) + "]\nx = 1\n",
                                  ["levels deep"]),
}


@pytest.mark.parametrize("name", list(HOSTILE))
def test_hostile_nesting_is_refused(capsys, tmp_path, name):
    text, words = HOSTILE[name]
    path = tmp_path / "hostile.toml"
    path.write_text(text, "utf-8")
    err = refused(capsys, path, *words)
    assert f"more than {limits.MAX_DEPTH} levels" in err


def test_file_over_the_size_limit_is_refused(capsys, tmp_path):
    # A valid study padded with a comment to one byte over the limit.
    text = (demo_lines_dir() / DEMO_1C).read_text("utf-8")
    path = tmp_path / "big.toml"
    path.write_text(text + "#" * (limits.MAX_FILE_BYTES - len(text.encode()) + 1), "utf-8")
    refused(capsys, path, "larger than 1024 KiB")
    # At the limit exactly it is read (the comment is harmless).
    path.write_text(text + "#" * (limits.MAX_FILE_BYTES - len(text.encode())), "utf-8")
    assert main(["params", str(path)]) == 0
    capsys.readouterr()


@pytest.mark.skipif(not Path("/dev/zero").exists(), reason="needs /dev/zero")
def test_endless_file_is_refused(capsys):
    # The size the file system gives (0) is not trusted: reading stops past the limit.
    refused(capsys, Path("/dev/zero"), "larger than")


def test_philosophy_file_size_limit(capsys, tmp_path, variant):
    phil = tmp_path / "phil.toml"
    phil.write_text("#" * (limits.MAX_FILE_BYTES + 1), "utf-8")
    path = variant(DEMO_1C, lambda d: d["study"].update(philosophy=str(phil)))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        assert main(["settings", str(path)]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "phil.toml" in err and "larger than" in err, err


# -- counts: lists and named tables refused before their items are read ----------------------

def _sections(n: int):
    def edit(d):
        d["line"]["length"] = f"{n} km"
        d["line"]["sections"] = [{"length": "1 km", "order": ["A", "B", "C"]}] * n
    return edit


def _many(table: str, key: str, make):
    def edit(d):
        d.setdefault(table, {})[key] = make()
    return edit


COUNTS = {
    # name: (edit, field, limit)
    "sections": (_sections(limits.MAX_SECTIONS + 1), "line.sections", limits.MAX_SECTIONS),
    "shield wires": (lambda d: d.update(shield_wires=d["shield_wires"] * (
        limits.MAX_SHIELD_WIRES + 1)), "shield_wires", limits.MAX_SHIELD_WIRES),
    "conductor types": (lambda d: d["conductor_types"].update(
        {f"c{k}": {"code": "x"} for k in range(limits.MAX_CONDUCTOR_TYPES)}),
        "conductor_types", limits.MAX_CONDUCTOR_TYPES),
    "fault locations": (_many("reach_study", "locations_pct",
                              lambda: [50.0] * (limits.MAX_LOCATIONS + 1)),
                        "reach_study.locations_pct", limits.MAX_LOCATIONS),
    "fault resistances": (_many("reach_study", "fault_resistances",
                                lambda: ["1 ohm"] * (limits.MAX_SWEEP_VALUES + 1)),
                          "reach_study.fault_resistances", limits.MAX_SWEEP_VALUES),
    "source cases": (_many("reach_study", "source_cases",
                           lambda: [{"name": "s"}] * (limits.MAX_SWEEP_VALUES + 1)),
                     "reach_study.source_cases", limits.MAX_SWEEP_VALUES),
    "fault types": (_many("reach_study", "fault_types",
                          lambda: ["AG"] * (limits.MAX_FAULT_TYPES + 1)),
                    "reach_study.fault_types", limits.MAX_FAULT_TYPES),
    "transfer angles": (_many("load", "transfer_angles",
                              lambda: ["1 deg"] * (limits.MAX_SWEEP_VALUES + 1)),
                        "load.transfer_angles", limits.MAX_SWEEP_VALUES),
    "power flows": (_many("load", "power_flows",
                          lambda: [{"active_power": "1 MW"}] * (limits.MAX_SWEEP_VALUES + 1)),
                    "load.power_flows", limits.MAX_SWEEP_VALUES),
    "adjacent lines": (lambda d: d.update(adjacent_lines=d["adjacent_lines"] * (
        limits.MAX_ADJACENT_LINES // 2 + 1)), "adjacent_lines", limits.MAX_ADJACENT_LINES),
    "revisions": (lambda d: d.update(revisions=[{"revision": "A", "date": "2020-01-01"}] * (
        limits.MAX_ITEMS + 1)), "revisions", limits.MAX_ITEMS),
}


@pytest.mark.parametrize("name", list(COUNTS))
def test_counts_over_the_limit_are_refused(capsys, variant, name):
    edit, field, most = COUNTS[name]
    refused(capsys, variant(DEMO_1C, edit), f"{field}", f"at most {most:,}")


def test_sections_at_the_limit_are_read(capsys, variant):
    # The limit itself is allowed: the rule refuses only what lies beyond it.
    assert main(["params", str(variant(DEMO_1C, _sections(limits.MAX_SECTIONS)))]) == 0
    capsys.readouterr()


def test_a_million_sections_is_refused(capsys, tmp_path):
    # About 40 MB: refused on its size before it is parsed.
    d = _demo()
    del d["line"]["sections"]
    text = dump_toml(d) + "sections = [\n" + '{length = "1 m", order = ["A", "B", "C"]},\n' * (
        10**6) + "]\n"
    path = tmp_path / "million.toml"
    path.write_text(text.replace("[line]\n", "[line]\n", 1), "utf-8")
    refused(capsys, path, "larger than")


def test_as_many_sections_as_fit_in_the_size_limit_are_refused(capsys, tmp_path):
    d = _demo()
    n = limits.MAX_FILE_BYTES // 70
    d["line"]["sections"] = [{"length": "1 m", "order": ["A", "B", "C"]}] * n
    text = dump_toml(d)
    assert len(text.encode()) < limits.MAX_FILE_BYTES
    path = tmp_path / "many.toml"
    path.write_text(text, "utf-8")
    refused(capsys, path, "line.sections", f"has {n:,} sections",
            f"at most {limits.MAX_SECTIONS:,}")


# -- under a memory cap, in a fresh process --------------------------------------------------

def _capped_files(tmp_path) -> dict[str, Path]:
    out = {}
    for name in ("brackets 300 000 deep", "one dotted key of 100 000 parts",
                 "many distinct dotted keys", "table header 50 000 parts"):
        out[name] = tmp_path / f"{name.replace(' ', '_')}.toml"
        out[name].write_text(HOSTILE[name][0], "utf-8")
    d = _demo()
    d["line"]["sections"] = [{"length": "1 m", "order": ["A", "B", "C"]}] * (
        limits.MAX_FILE_BYTES // 70)
    out["sections filling the size limit"] = tmp_path / "sections.toml"
    out["sections filling the size limit"].write_text(dump_toml(d), "utf-8")
    out["over the size limit"] = tmp_path / "big.toml"
    out["over the size limit"].write_text("a" + ".a" * limits.MAX_FILE_BYTES + " = 1\n")
    return out


def test_hostile_files_under_a_memory_cap(tmp_path):
    ok = _capped_cli(demo_lines_dir() / DEMO_1C)
    assert ok.returncode == 0, ok.stderr  # the cap leaves room for a real study
    for name, path in _capped_files(tmp_path).items():
        r = _capped_cli(path)
        assert r.returncode == 2, (name, r.stderr[-500:])
        lines = r.stderr.strip().splitlines()
        assert len(lines) == 1 and lines[0].startswith("relayset: error: "), (name, r.stderr)
        assert f"{path.name}: " in lines[0], lines[0]  # a long path keeps its end
        assert "Traceback" not in r.stderr and "MemoryError" not in r.stderr


# -- the depth scan measures what the TOML reader builds -------------------------------------

def _depth(obj) -> int:
    """Levels of keys and list places from the top to the deepest value."""
    if isinstance(obj, dict):
        return max((1 + _depth(v) for v in obj.values()), default=0)
    if isinstance(obj, list):
        return max((1 + _depth(v) for v in obj), default=0)
    return 0


def _scanned(text: str) -> int:
    return next(d for d in range(0, 200) if nesting_depth(text, d) is None)


_KEYS = st.text(st.characters(blacklist_categories=("Cc", "Cs")), min_size=1, max_size=6)
_LEAF = st.one_of(st.integers(), st.floats(allow_nan=False), st.booleans(),
                  st.text(st.characters(blacklist_categories=("Cc", "Cs")), max_size=8))
_TREE = st.recursive(_LEAF, lambda inner: st.one_of(
    st.lists(inner, min_size=1, max_size=3),
    st.dictionaries(_KEYS, inner, min_size=1, max_size=3)), max_leaves=12)


@settings(max_examples=300, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow])
@given(data=st.dictionaries(_KEYS, _TREE, min_size=1, max_size=4))
def test_scan_depth_equals_the_parsed_depth(data):
    # Checked against the TOML reader itself (Python's tomllib): the scan finds the depth
    # of the tables it builds, whatever the keys and strings hold ([, {, ., #, quotes).
    text = dump_toml(data)
    try:
        parsed = tomllib.loads(text)
    except tomllib.TOMLDecodeError:
        assume(False)
    assert _scanned(text) == _depth(parsed), text


@pytest.mark.parametrize("text", [
    'a = """x [[[[ \n "" \\""" ]]]"""\nb = 1\n',
    "a = '''[[[['''''\n",
    'a = "[[[#" # [[[[\n',
    '[ "a.b" . c ]\n x = [ {y = [1, [2]]}, {z = 1} ]\n',
    "a.b.c = {d.e = [[{f = 1}]]}\n[[t.u]]\nv = 1\n[[t.u]]\nv=[ \n [ 1 ], # ]\n]\n",
])
def test_scan_depth_of_awkward_text(text):
    assert _scanned(text) == _depth(tomllib.loads(text))


def test_demo_studies_nest_well_inside_the_limit():
    for path in demo_lines_dir().glob("*.toml"):
        assert _scanned(path.read_text("utf-8")) <= 6, path
