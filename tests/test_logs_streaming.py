"""Large CSV logs are read in chunks, with the same table and the same messages."""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pytest
from conftest import write_log_csv

import geo3d.io.logs_reader as logs_reader
from geo3d.config import LogsSection
from geo3d.errors import LogFormatError
from geo3d.io.logs_reader import read_log


@pytest.fixture
def small_chunks(monkeypatch):
    """Stream every file, four rows at a time."""
    monkeypatch.setattr(logs_reader, "STREAM_BYTES", 0)
    monkeypatch.setattr(logs_reader, "CHUNK_ROWS", 4)


def whole(path: Path, **kwargs) -> pd.DataFrame | str:
    saved = logs_reader.STREAM_BYTES
    logs_reader.STREAM_BYTES = 1 << 60
    try:
        return read_log(path, **kwargs)
    except LogFormatError as exc:
        return str(exc)
    finally:
        logs_reader.STREAM_BYTES = saved


def test_streamed_log_equals_whole_file_read(tmp_path, small_chunks):
    path = tmp_path / "B2.csv"
    write_log_csv(path, "B2")
    expected = whole(path, logs=LogsSection(time="time"))
    streamed = read_log(path, logs=LogsSection(time="time"))
    pd.testing.assert_frame_equal(streamed, expected)
    assert len(streamed) == 11


@pytest.mark.parametrize(
    ("line", "column", "value"),
    [(11, "pressure", "high"), (3, "flow", "-3"), (12, "depth", ""), (7, "flow", "1,5")],
)
def test_bad_cell_in_a_later_chunk_named_like_the_whole_file_reader(
    tmp_path, small_chunks, line, column, value
):
    path = tmp_path / "B1.csv"
    write_log_csv(path, "B1")
    lines = path.read_text().splitlines()
    header = lines[0].split(",")
    cells = lines[line - 1].split(",")
    cells[header.index(column)] = value
    lines[line - 1] = ",".join(cells)
    path.write_text("\n".join(lines) + "\n")
    expected = whole(path)
    assert isinstance(expected, str), expected
    with pytest.raises(LogFormatError) as info:
        read_log(path)
    assert str(info.value) == expected
    if value != "1,5":  # an extra field shifts the columns: named by the whole-file reader
        assert f"line {line}" in str(info.value) and column in str(info.value)


def test_boring_id_column_streamed(tmp_path, small_chunks):
    path = tmp_path / "any_name.csv"
    write_log_csv(path, "B3")
    lines = path.read_text().splitlines()
    path.write_text("\n".join([lines[0] + ",hole"] + [x + ",B3" for x in lines[1:]]) + "\n")
    table = read_log(path, logs=LogsSection(boring_id="hole"))
    assert set(table["boring_id"]) == {"B3"} and len(table) == 11
    path.write_text(path.read_text()[: -len(",B3\n")] + ",B4\n")
    with pytest.raises(LogFormatError, match="one boring per log file"):
        read_log(path, logs=LogsSection(boring_id="hole"))


def test_hampel_on_a_dense_log_uses_memory_proportional_to_its_length(monkeypatch):
    """A window too large to hold for every sample at once switches to rolling medians.

    Both paths flag the same planted spikes on a noisy series (invented values).
    """
    import numpy as np

    import geo3d.logs.flags as flags

    rng = np.random.default_rng(3)
    x = rng.normal(size=4000)
    spikes = [150, 1999, 3500]
    x[spikes] += 25.0
    exact, exact_median, _ = flags.hampel(x, half_window=40)
    monkeypatch.setattr(flags, "EXACT_WINDOW_CELLS", 0)
    rolled, rolled_median, _ = flags.hampel(x, half_window=40)
    assert set(spikes) <= set(np.flatnonzero(exact)) and set(spikes) <= set(np.flatnonzero(rolled))
    np.testing.assert_allclose(rolled_median, exact_median)
    assert abs(int(rolled.sum()) - int(exact.sum())) <= 3
