"""The register files written like `settings --csv` and a formatted, reproducible .xlsx; the
names of people who sign refused when they name nobody."""

from __future__ import annotations

import io
import zipfile

import pytest

from relayset.cli import main
from relayset.fleet.register import NAMES, failed_row, register_xlsx, write_register
from relayset.resources import demo_lines_dir


def _row(**values):
    row = dict.fromkeys(NAMES)
    row.update(line_id="L-1", revision="A", end="West", zone1_primary_ohm=1 / 3,
               overreach_on_line_pct=2.0 / 3.0, k0_magnitude=0.1 + 0.2, failed_checks=2,
               title="Ω line")
    row.update(values)
    return row


def test_register_csv_is_written_like_settings_csv(tmp_path):
    write_register(tmp_path, [_row()], title="t", formats=("csv",))
    data = (tmp_path / "register.csv").read_bytes()
    assert data.startswith(b"\xef\xbb\xbf")  # UTF-8 byte-order mark, as settings --csv
    assert b"\r\n" in data and b"\n" not in data.replace(b"\r\n", b"")
    text = data.decode("utf-8-sig")
    # 12 significant digits (format spec ".12g", the Python documentation's rule)
    assert ",0.333333333333," in text and ",0.3," in text  # 0.1 + 0.2 is 0.3 to 12 digits
    assert "0.30000000000000004" not in text and "0.3333333333333333" not in text
    assert "Ω line" in text


def test_register_xlsx_is_formatted():
    from openpyxl import load_workbook

    ws = load_workbook(io.BytesIO(register_xlsx([_row(), failed_row("x", "bad")]))).active
    assert ws.freeze_panes == "C2"
    assert all(c.font.bold for c in ws[1])
    assert ws.auto_filter.ref.startswith("A1:")
    col = NAMES.index("zone1_primary_ohm") + 1
    assert ws.cell(row=2, column=col).number_format == "0.000"
    assert ws.cell(row=2, column=col).value == pytest.approx(1 / 3, rel=1e-15)  # full value
    assert ws.cell(row=2, column=NAMES.index("overreach_on_line_pct") + 1).number_format \
        == "0.00"
    letter = ws.cell(row=1, column=NAMES.index("title") + 1).column_letter
    assert ws.column_dimensions[letter].width >= len("title")


def test_register_xlsx_same_bytes_for_the_same_rows(monkeypatch):
    """openpyxl stamps the time into docProps/core.xml and each zip entry: both are fixed.
    The clock is moved on between the two writes instead of waiting."""
    import datetime as dt
    import time

    monkeypatch.delenv("SOURCE_DATE_EPOCH", raising=False)
    rows = [_row(), failed_row("x", "bad")]
    a = register_xlsx(rows)
    real_localtime, real_now = time.localtime, dt.datetime
    monkeypatch.setattr(time, "localtime", lambda t=None: real_localtime(
        (t if t is not None else time.time()) + 86_400 * 400))

    class Later(dt.datetime):
        @classmethod
        def now(cls, tz=None):
            return real_now.now(tz) + dt.timedelta(days=400)

    import openpyxl.writer.excel as excel

    monkeypatch.setattr(excel.datetime, "datetime", Later)
    b = register_xlsx(rows)
    assert a == b
    with zipfile.ZipFile(io.BytesIO(a)) as z:
        core = z.read("docProps/core.xml").decode()
        assert "2000-01-01T00:00:00Z" in core
        assert {i.date_time for i in z.infolist()} == {(2000, 1, 1, 0, 0, 0)}


@pytest.mark.parametrize("name", ["x", "-", "J.", "  ?  "])
@pytest.mark.parametrize("role", ["prepared_by", "checked_by", "approved_by"])
def test_names_of_people_need_two_letters(tmp_path, capsys, role, name):
    import tomllib

    from tomlwrite import dump_toml

    data = tomllib.loads((demo_lines_dir() / "kessler_oxbow_115kv.toml").read_text("utf-8"))
    data["study"][role] = name
    path = tmp_path / "line.toml"
    path.write_text(dump_toml(data), "utf-8")
    assert main(["params", str(path)]) == 2
    err = capsys.readouterr().err.strip()
    assert err.count("\n") == 0 and f"study.{role}" in err and "at least two letters" in err


def test_two_letter_initials_are_a_name(tmp_path, capsys):
    import tomllib

    from tomlwrite import dump_toml

    data = tomllib.loads((demo_lines_dir() / "kessler_oxbow_115kv.toml").read_text("utf-8"))
    data["study"]["checked_by"] = "Wu"
    path = tmp_path / "line.toml"
    path.write_text(dump_toml(data), "utf-8")
    assert main(["params", str(path)]) == 0
