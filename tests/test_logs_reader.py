import tempfile
from pathlib import Path

import lasio
import numpy as np
import pandas as pd
import pytest
from conftest import mini_log, write_log_csv
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from geo3d.config import LogsSection, UnitsSection
from geo3d.errors import Geo3dWarning, LogFormatError, SiteValidationError
from geo3d.io.logs_reader import read_log, read_logs

FT = 0.3048  # m (NIST SP 811)
PSI = 6.894757  # kPa (NIST SP 811)


def write_las(path: Path, values: dict, *, depth_unit: str = "M", well: str = "") -> None:
    las = lasio.LASFile()
    las.well["WELL"].value = well
    las.append_curve("DEPTH", values["depth"], unit=depth_unit)
    for name, unit in (("PRESSURE", "KPA"), ("FLOW", "ML/MIN"), ("EC", "MS/M"), ("TIME", "S")):
        las.append_curve(name, values[name.lower()], unit=unit)
    with path.open("w") as handle:
        las.write(handle, version=2.0)


def test_las_reads_like_csv(tmp_path: Path):
    values = mini_log("B2")
    write_log_csv(tmp_path / "B2.csv", "B2")
    write_las(tmp_path / "B2.las", values)
    logs = LogsSection(time="time")
    from_csv = read_log(tmp_path / "B2.csv", logs=logs)
    from_las = read_log(tmp_path / "B2.las", logs=logs)
    pd.testing.assert_frame_equal(from_csv, from_las)
    assert list(from_csv.columns) == ["boring_id", "depth", "pressure", "flow", "ec", "time_s"]
    assert from_csv["boring_id"].iloc[0] == "B2"
    # 300 mL/min = 5e-6 m3/s (definition of the litre and the minute)
    np.testing.assert_allclose(from_csv["flow"], 5e-6)


def test_las_boring_id_from_well_header(tmp_path: Path):
    write_las(tmp_path / "file1.las", mini_log("B1"), well="B-101")
    table = read_log(tmp_path / "file1.las", logs=LogsSection(boring_id="WELL"))
    assert set(table["boring_id"]) == {"B-101"}


def test_las_missing_curve(tmp_path: Path):
    write_las(tmp_path / "B1.las", mini_log("B1"))
    with pytest.raises(LogFormatError, match=r"B1.las, ~Curve: missing curve 'cond'"):
        read_log(tmp_path / "B1.las", logs=LogsSection(ec="cond"))


def test_las_depth_unit_disagreement_warns(tmp_path: Path):
    write_las(tmp_path / "B1.las", mini_log("B1"), depth_unit="F")
    with pytest.warns(Geo3dWarning, match="depth unit"):
        read_log(tmp_path / "B1.las")


def test_csv_units_header_rows_and_delimiter(tmp_path: Path):
    text = "Logger export\nrig 7\nz;p;q;cond\n1.0;20;1;500\n2.0;21;1.5;600\n"
    path = tmp_path / "X9.txt"
    path.write_text(text)
    logs = LogsSection(depth="z", pressure="p", flow="q", ec="cond", header_rows=2, delimiter=";")
    units = UnitsSection(length="ft", pressure="psi", flow="gal/min", ec="uS/cm")
    table = read_log(path, logs=logs, units=units)
    np.testing.assert_allclose(table["depth"], [FT, 2 * FT])
    np.testing.assert_allclose(table["pressure"], [20 * PSI, 21 * PSI])
    # 1 US gal = 3.785411784 L (NIST SP 811)
    np.testing.assert_allclose(table["flow"], [3.785411784e-3 / 60, 1.5 * 3.785411784e-3 / 60])
    np.testing.assert_allclose(table["ec"], [50.0, 60.0])  # 1 uS/cm = 0.1 mS/m
    assert table["boring_id"].iloc[0] == "X9"


HEADER = "depth,pressure,flow,ec\n"


@pytest.mark.parametrize(
    ("text", "message"),
    [
        (
            HEADER + "1.0,150,300,20\n1.5,150,300,20\n1.4,150,300,20\n",
            r"B1.csv, line 4, column 'depth'.*strictly increasing",
        ),
        (HEADER + "-0.5,150,300,20\n1.5,150,300,20\n", r"line 2, column 'depth'.*negative"),
        (HEADER + "1.0,150,300,20\n1.5,high,300,20\n", r"line 3, column 'pressure': not a number"),
        ("depth,presure,flow,ec\n1.0,150,300,20\n", r"missing column 'pressure' \(found 'presure'"),
        ("", "empty"),
        (HEADER + "1.0,150,300,20\n1.5,150,-3,20\n", r"line 3, column 'flow'.*>= 0"),
    ],
)
def test_bad_log_is_refused_naming_the_place(tmp_path: Path, text: str, message: str):
    path = tmp_path / "B1.csv"
    path.write_text(text)
    with pytest.raises(LogFormatError, match=message):
        read_log(path)


def test_read_logs_collects_every_bad_file(tmp_path: Path):
    for boring in ("B1", "B2"):
        write_log_csv(tmp_path / "logs" / f"{boring}.csv", boring)
    (tmp_path / "logs" / "B3.csv").write_text("depth,pressure,flow\n1,2,3\n")
    (tmp_path / "logs" / "B4.csv").write_text("")
    with pytest.raises(SiteValidationError) as info:
        read_logs("logs/*.csv", root=tmp_path)
    assert len(info.value.problems) == 2
    assert any("B3.csv" in p and "'ec'" in p for p in info.value.problems)


def test_read_logs_sorted_and_globs(tmp_path: Path):
    for boring in ("B2", "B1"):
        write_log_csv(tmp_path / "logs" / f"{boring}.csv", boring)
    (tmp_path / "more").mkdir()
    write_las(tmp_path / "more" / "B3.las", mini_log("B3"))
    samples, sources = read_logs(["logs/*.csv", "more/*.las"], root=tmp_path)
    assert list(samples["boring_id"].unique()) == ["B1", "B2", "B3"]
    assert sources["B3"].suffix == ".las"
    assert (np.diff(samples[samples.boring_id == "B1"]["depth"]) > 0).all()
    with pytest.raises(LogFormatError, match="no log file matches"):
        read_logs("nothing/*.csv", root=tmp_path)


def test_las_null_ec_becomes_nan(tmp_path: Path):
    values = mini_log("B1")
    values["ec"] = values["ec"].copy()
    values["ec"][2] = np.nan  # written as the LAS NULL value
    write_las(tmp_path / "B1.las", values)
    table = read_log(tmp_path / "B1.las")
    assert np.isnan(table["ec"].iloc[2]) and np.isfinite(table["ec"]).sum() == 10


@settings(
    max_examples=15, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(
    steps=st.lists(st.integers(min_value=1, max_value=500), min_size=2, max_size=30),
    seed=st.integers(min_value=0, max_value=2**32 - 1),
)
def test_las_and_csv_agree_for_any_log(tmp_path: Path, steps, seed):
    # Invariant: the same numbers stored as LAS 2.0 and as CSV read to the same table.
    rng = np.random.default_rng(seed)
    depth = np.cumsum(steps) / 1000.0  # strictly increasing, mm resolution
    values = {
        "depth": depth,
        "pressure": np.round(rng.uniform(80, 1400, depth.size), 3),
        "flow": np.round(rng.uniform(0, 1000, depth.size), 3),
        "ec": np.round(rng.uniform(1, 500, depth.size), 3),
        "time": np.round(depth / 0.02, 3),
    }
    folder = Path(tempfile.mkdtemp(dir=tmp_path))
    lines = ["depth,pressure,flow,ec,time"]
    for row in zip(*(values[k] for k in ("depth", "pressure", "flow", "ec", "time")), strict=True):
        lines.append(",".join(repr(float(v)) for v in row))
    (folder / "P1.csv").write_text("\n".join(lines) + "\n")
    write_las(folder / "P1.las", values)
    logs = LogsSection(time="time")
    pd.testing.assert_frame_equal(
        read_log(folder / "P1.csv", logs=logs), read_log(folder / "P1.las", logs=logs)
    )
