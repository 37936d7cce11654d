from pathlib import Path

import pytest

from geo3d.errors import OutputExistsError
from geo3d.io.atomic import atomic_file, output_folder


def test_atomic_file_renames_on_success(tmp_path: Path):
    target = tmp_path / "sub" / "table.csv"
    with atomic_file(target) as tmp:
        assert tmp.parent == target.parent
        assert tmp != target
        tmp.write_text("a,b\n")
        assert not target.exists()  # nothing visible before the block ends
    assert target.read_text() == "a,b\n"
    assert list(target.parent.iterdir()) == [target]


def test_atomic_file_keeps_old_file_and_cleans_up_on_error(tmp_path: Path):
    target = tmp_path / "table.csv"
    target.write_text("old")
    with pytest.raises(RuntimeError, match="boom"):
        with atomic_file(target) as tmp:
            tmp.write_text("half")
            raise RuntimeError("boom")
    assert target.read_text() == "old"
    assert list(tmp_path.iterdir()) == [target]


def test_atomic_file_replaces_existing(tmp_path: Path):
    target = tmp_path / "a.txt"
    target.write_text("old")
    with atomic_file(target) as tmp:
        tmp.write_text("new")
    assert target.read_text() == "new"


def test_output_folder_success_and_refusal(tmp_path: Path):
    out = tmp_path / "results"
    with output_folder(out) as stage:
        (stage / "x.txt").write_text("1")
        assert not out.exists()
    assert (out / "x.txt").read_text() == "1"
    with pytest.raises(OutputExistsError, match="results"):
        with output_folder(out):
            pass
    assert (out / "x.txt").read_text() == "1"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["results"]


def test_output_folder_overwrite_replaces_contents(tmp_path: Path):
    out = tmp_path / "results"
    out.mkdir()
    (out / "old.txt").write_text("old")
    with output_folder(out, overwrite=True) as stage:
        (stage / "new.txt").write_text("new")
    assert sorted(p.name for p in out.iterdir()) == ["new.txt"]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["results"]


def test_output_folder_error_leaves_old_results(tmp_path: Path):
    out = tmp_path / "results"
    out.mkdir()
    (out / "old.txt").write_text("old")
    with pytest.raises(ValueError):
        with output_folder(out, overwrite=True) as stage:
            (stage / "half.txt").write_text("half")
            raise ValueError("failed half way")
    assert sorted(p.name for p in out.iterdir()) == ["old.txt"]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["results"]


def test_output_folder_accepts_existing_empty_folder(tmp_path: Path):
    out = tmp_path / "results"
    out.mkdir()
    with output_folder(out) as stage:
        (stage / "a").write_text("a")
    assert (out / "a").exists()


def test_outputs_get_the_usual_modes_not_private_ones(tmp_path):
    # tempfile makes 0600 files and 0700 folders; finished outputs must be readable by others
    # as any new file would be (mode 0666/0777 less the umask).
    import os

    mask = os.umask(0o022)
    try:
        with output_folder(tmp_path / "out") as staging:
            with atomic_file(staging / "table.csv") as tmp:
                tmp.write_text("a\n1\n")
        assert (tmp_path / "out").stat().st_mode & 0o777 == 0o755
        assert (tmp_path / "out" / "table.csv").stat().st_mode & 0o777 == 0o644
    finally:
        os.umask(mask)
