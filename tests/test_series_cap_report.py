"""The series capacitor part of the report (templates/report/series_capacitors.html.j2) and
the settings' inversion warnings, on a variant of the invented demo with a bank at a bus."""

from __future__ import annotations

import tomllib
from pathlib import Path

import tomli_w

from relayset.studies import pipeline

DEMO = Path(__file__).resolve().parents[1] / "demo_lines" / "tarrow_hithe_400kv_series_comp.toml"


def test_bus_bank_report_and_warnings(tmp_path):
    data = tomllib.loads(DEMO.read_text())
    data["study"]["philosophy"] = str(DEMO.parent / data["study"]["philosophy"])
    b = data["series_capacitors"][0]
    b.pop("distance"), b.pop("measured_from")
    b.update(at="Tarrow Ness", vt_side="bus", name="<b>Kelp</b> & bank")
    data["relay"]["end"] = "both"
    path = tmp_path / "bus_bank.toml"
    path.write_text(tomli_w.dumps(data))
    res = pipeline.run(path, settings=True)
    # A bus-side VT behind a bank at its own bus sees voltage inversion for a fault just
    # beyond the bank (X_C > 0 = the line reactance between them, textbook condition): the
    # settings at that end carry it as a warning, the other end's do not.
    warned = {s.end: {w.rule_id for w in s.warnings} for s in res.settings}
    assert "series_capacitor_voltage_inversion" in warned["Tarrow Ness"]
    assert "series_capacitor_voltage_inversion" not in warned["Hithe Vale"]
    from relayset.report.context import build_context
    from relayset.report.html import render_html

    html = render_html(build_context(res), path.read_text())
    assert 'id="series-capacitors"' in html
    assert "<b>Kelp</b>" not in html and "&lt;b&gt;Kelp&lt;/b&gt; &amp; bank" in html
    assert "WARNING: exists" in html  # the inversion, in the table of conditions
    assert "Goldsworthy" in html
    # Z1 with and without the bank, as in the JSON
    caps = res.reach_study.series_capacitors
    assert "Line Z1 without the banks" in html
    assert caps["z1_compensated_ohm"]["Tarrow Ness"][1] < caps["z1_line_ohm"][1]
    # the governing cases name their capacitor state
    assert "series capacitors in service" in html
