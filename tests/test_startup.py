"""Start-up structure: each command imports only what it needs (no timings here; the speed
figures live in tests/benchmarks/bench_startup.py), the version without package metadata,
and the console templates' compiled-code cache, which must never change the output.
"""

from __future__ import annotations

import importlib.metadata
import json
import os
import stat
import subprocess
import sys
import textwrap

import pytest
from jinja2.bccache import bc_magic

from relayset.resources import demo_lines_dir

DEMO = demo_lines_dir() / "greyholt_ivel_400kv_twin.toml"

#: Heavy libraries no console command may load (the report and the unit registry use them;
#: pydantic none: the input layer validates with relayset.inputs.schema).
HEAVY = ("scipy", "pint", "pandas", "weasyprint", "matplotlib", "pydantic")


def _modules_after(args: list[str], env: dict[str, str] | None = None) -> set[str]:
    """The modules loaded by one command run in a fresh interpreter."""
    code = textwrap.dedent(f"""
        import contextlib, io, json, sys
        from relayset.cli import main
        with contextlib.redirect_stdout(io.StringIO()):
            try:
                rc = main({args!r})
            except SystemExit as exc:
                rc = exc.code
        assert rc == 0, rc
        print(json.dumps(sorted(sys.modules)))
    """)
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True, env=env)
    return set(json.loads(out.stdout))


def _loaded(modules: set[str], package: str) -> list[str]:
    return sorted(m for m in modules if m == package or m.startswith(package + "."))


def test_params_loads_no_heavy_library_and_no_later_study_step():
    mods = _modules_after(["params", str(DEMO)])
    for pkg in HEAVY:
        assert not _loaded(mods, pkg), pkg
    # The reach study, the settings and the verification are later steps of the pipeline,
    # and their results types and templates' helpers load with them.
    for pkg in ("relayset.studies.reach", "relayset.studies.settings",
                "relayset.studies.verification", "relayset.settings", "relayset.results.reach",
                "relayset.results.settings", "relayset.results.verification",
                "relayset.inputs.philosophy", "relayset.report.tables", "relayset.io"):
        assert not _loaded(mods, pkg), pkg
    assert "relayset.studies.pipeline" in mods  # the check above ran the real command


@pytest.mark.parametrize("command, demo", [
    ("reach", DEMO), ("settings", DEMO.with_name("ashcombe_brenwick_132kv.toml"))])  # verifies
def test_reach_and_settings_load_no_heavy_library(command, demo):
    mods = _modules_after([command, str(demo)])
    for pkg in (*HEAVY, "numpy.ma"):  # numpy.ma: np.unique loads it (about 10 ms)
        assert not _loaded(mods, pkg), pkg
    assert "relayset.studies.reach" in mods


def test_no_relayset_module_loads_pydantic():
    """Every module of the package, imported in one fresh interpreter: no pydantic (it cost
    about 40 % of the start-up of every command)."""
    code = textwrap.dedent("""
        import importlib, json, pkgutil, sys
        import relayset
        for m in pkgutil.walk_packages(relayset.__path__, "relayset."):
            importlib.import_module(m.name)
        print(json.dumps(sorted(sys.modules)))
    """)
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    mods = set(json.loads(out.stdout))
    assert "relayset.inputs.study_file" in mods and "relayset.report.html" in mods
    assert not _loaded(mods, "pydantic")


def test_unique_sorted_is_numpy_unique():
    """The helper that spares numpy.ma gives np.unique's answer (numpy as the reference):
    real and complex values, repeats, 2-D input, empty input."""
    import numpy as np

    from relayset.physics.arrays import unique_sorted

    rng = np.random.default_rng(7)
    cases = [rng.integers(0, 5, 40) / 4, np.round(rng.normal(size=(6, 5)), 1),
             np.array([1 + 2j, 1 + 2j, 1 - 2j, -3j, 0j]), np.array([]), np.array([0.25])]
    for x in cases:
        want = np.unique(x)
        got = unique_sorted(x)
        assert got.dtype == want.dtype and np.array_equal(got, want)


@pytest.mark.parametrize("command", ["earth-models", "conductors", "--version"])
def test_listing_commands_load_no_study_machinery(command):
    mods = _modules_after([command])
    for pkg in ("relayset.studies", "relayset.results", "numpy", "pydantic", "jinja2",
                "importlib.metadata", *HEAVY):
        assert not _loaded(mods, pkg), pkg


def test_version_is_the_installed_distributions():
    """relayset/_version.py is what the build stamps into the package metadata."""
    from relayset._version import relayset_version
    from relayset.studies.pipeline import relayset_version as pipeline_version

    assert relayset_version() == importlib.metadata.version("relayset")
    assert pipeline_version is relayset_version
    out = subprocess.run([sys.executable, "-m", "relayset.cli", "--version"],
                         capture_output=True, text=True, check=True).stdout
    assert out == f"relayset {relayset_version()}\n"


# -- the compiled-template cache --------------------------------------------------------------

def _render_params(cache_home: str | None) -> subprocess.CompletedProcess:
    env = dict(os.environ)
    if cache_home is not None:
        env["XDG_CACHE_HOME"] = cache_home
    return subprocess.run([sys.executable, "-m", "relayset.cli", "params", str(DEMO)],
                          capture_output=True, text=True, env=env)


@pytest.fixture(scope="module")
def uncached_output(tmp_path_factory) -> str:
    """The summary rendered with the cache switched off (a cache root that is a file)."""
    blocker = tmp_path_factory.mktemp("nocache") / "file"
    blocker.write_text("not a folder")
    res = _render_params(str(blocker))
    assert res.returncode == 0 and res.stderr == ""
    return res.stdout


def test_template_cache_is_written_and_gives_the_same_output(tmp_path, uncached_output):
    first = _render_params(str(tmp_path))
    cached = list((tmp_path / "relayset" / "templates").glob("*.cache"))
    assert len(cached) == 1  # params.txt.j2, compiled once
    assert stat.S_IMODE(cached[0].stat().st_mode) & 0o077 == 0  # private to the user
    second = _render_params(str(tmp_path))  # now read from the cache
    assert first.stdout == second.stdout == uncached_output
    assert first.stderr == second.stderr == ""


@pytest.mark.skipif(os.name == "nt" or os.geteuid() == 0,
                    reason="needs POSIX permissions that bind the user (not root)")
def test_unwritable_cache_is_skipped(tmp_path, uncached_output):
    ro = tmp_path / "ro"
    ro.mkdir()
    ro.chmod(0o500)
    try:
        res = _render_params(str(ro))
    finally:
        ro.chmod(0o700)
    assert res.returncode == 0 and res.stderr == ""
    assert res.stdout == uncached_output


def test_unwritable_cache_folder_is_skipped(tmp_path, uncached_output):
    """The cache folder exists but writing into it fails (a read-only file system, a full
    disk): Jinja2's write error is swallowed, the output is unchanged."""
    folder = tmp_path / "relayset" / "templates"
    folder.mkdir(parents=True, mode=0o700)
    env = {"XDG_CACHE_HOME": str(tmp_path)}
    code = textwrap.dedent("""
        import sys, tempfile
        def refuse(*a, **k):
            raise OSError(30, "Read-only file system")
        tempfile.NamedTemporaryFile = refuse
        from relayset.cli import main
        sys.exit(main(["params", sys.argv[1]]))
    """)
    res = subprocess.run([sys.executable, "-c", code, str(DEMO)], capture_output=True,
                         text=True, env={**os.environ, **env})
    assert res.returncode == 0 and res.stderr == ""
    assert res.stdout == uncached_output
    assert not list(folder.iterdir())


def test_corrupt_or_foreign_cache_is_ignored(tmp_path, uncached_output):
    _render_params(str(tmp_path))
    folder = tmp_path / "relayset" / "templates"
    (entry,) = folder.glob("*.cache")
    entry.write_bytes(b"j2 garbage that is no compiled template")
    res = _render_params(str(tmp_path))
    assert res.returncode == 0 and res.stderr == "" and res.stdout == uncached_output
    # The right header, then no valid checksum (Jinja2 itself would raise here).
    entry.write_bytes(bc_magic + b"\x00 not a checksum")
    res = _render_params(str(tmp_path))
    assert res.returncode == 0 and res.stderr == "" and res.stdout == uncached_output
    # A folder others may write to is never used: compiled code from it would be executed.
    entry.write_bytes(b"j2 garbage")
    folder.chmod(0o777)
    try:
        res = _render_params(str(tmp_path))
        assert res.stdout == uncached_output
        assert entry.read_bytes() == b"j2 garbage"  # neither read nor rewritten
    finally:
        folder.chmod(0o700)


def test_cache_key_follows_what_the_compiled_code_depends_on(monkeypatch):
    """Compiled code depends on the syntax options and the Jinja2 version, which Jinja2's own
    cache key (template path, source checksum, Python version) does not cover."""
    import jinja2

    from relayset.report import text

    env = text._env()
    fp = text._fingerprint(env)
    assert fp == text._fingerprint(text._env())
    for change in ({"trim_blocks": False}, {"lstrip_blocks": False},
                   {"keep_trailing_newline": False}, {"autoescape": True},
                   {"variable_start_string": "<<"}, {"newline_sequence": "\r\n"}):
        assert text._fingerprint(env.overlay(**change)) != fp, change
    monkeypatch.setattr(jinja2, "__version__", "0.0")
    assert text._fingerprint(env) != fp


@pytest.mark.parametrize("given, numpy_first, want", [
    (None, False, "1"),  # unset: one BLAS thread for the command
    ("3", False, "3"),  # the user's choice stays
    (None, True, None),  # numpy already imported (library use): too late, left alone
])
def test_command_runs_with_one_blas_thread_unless_told(given, numpy_first, want):
    """The command line sets one BLAS thread before numpy starts its pool (batched small
    matrices gain nothing from BLAS threads; the idle pool costs a busy machine), unless the
    user set the variable, and never once numpy is loaded."""
    code = ("import os, sys\n"
            + ("import numpy\n" if numpy_first else "")
            + "from relayset.cli import main\n"
            "try:\n    main(['--version'])\nexcept SystemExit:\n    pass\n"
            "print(os.environ.get('OPENBLAS_NUM_THREADS'))\n")
    env = {k: v for k, v in os.environ.items()
           if k not in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")}
    if given is not None:
        env["OPENBLAS_NUM_THREADS"] = given
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         env=env, check=False).stdout.split()
    assert out[-1] == str(want)
