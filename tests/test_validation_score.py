"""Tests of the volume scoring harness (geo3d.validation.score)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from geo3d.validation.score import run_site, score_volumes, summarize


def _truth() -> pd.DataFrame:
    rows = []
    for zone, part, values in (
        ("Z", "all", (100.0, 0.0, 900.0)),
        ("site", "saturated", (1000.0, 500.0, 8500.0)),
        ("site", "unsaturated", (10.0, 0.0, 90.0)),
        ("site", "all", (1010.0, 500.0, 8590.0)),
    ):
        for f, v in zip(("storage", "transitional", "transmissive"), values, strict=True):
            rows.append({"zone": zone, "part": part, "facies": f, "volume_m3": v})
        rows.append({"zone": zone, "part": part, "facies": "all", "volume_m3": sum(values)})
    return pd.DataFrame(rows)


def test_scores_relative_error_band_and_share():
    zone_table = pd.DataFrame(
        {
            "zone": ["site"] + ["Z"] * 3,
            "band": "all",
            "facies": ["storage", "storage", "transitional", "transmissive"],
            "bulk_volume_m3": [0.0, 80.0, 20.0, 900.0],
            "bulk_volume_m3_p10": [0.0, 70.0, 10.0, 850.0],
            "bulk_volume_m3_p90": [0.0, 110.0, 30.0, 950.0],
        }
    )
    parts = pd.DataFrame(
        {
            "part": ["saturated"] * 3,
            "facies": ["storage", "transitional", "transmissive"],
            "estimate_m3": [1100.0, 500.0, 8400.0],
            "p10_m3": [1050.0, 450.0, 8300.0],
            "p90_m3": [1150.0, 550.0, 8450.0],
        }
    )
    table = score_volumes(_truth(), zone_table, parts).set_index(["zone", "part", "facies"])
    row = table.loc[("Z", "all", "storage")]
    # (80 - 100) / 100 = -0.2; 100 lies in [70, 110]; width (110 - 70) / 100 = 0.4
    assert row["rel_error"] == pytest.approx(-0.2)
    assert bool(row["inside"]) and row["width"] == pytest.approx(0.4)
    assert row["share"] == pytest.approx(0.1)
    assert not bool(table.loc[("Z", "all", "transitional"), "inside"])
    site = table.loc[("site", "saturated", "storage")]
    assert site["rel_error"] == pytest.approx(0.1) and not bool(site["inside"])


@pytest.mark.slow
def test_harness_runs_the_whole_job_on_a_small_site(tmp_path):
    score = run_site(4, tmp_path, engine="facies", n_borings=8, n_realizations=3)
    summary = summarize([score])
    zones = score.table[score.table["zone"] != "site"]
    assert len(zones) > 0 and set(zones["part"]) == {"all"}
    assert np.isfinite(zones["estimate_m3"]).all()
    assert 0.0 <= summary["coverage"] <= 1.0
    # expected volumes of a zone add up to the zone's volume in the model, scaled to the zone's
    # exact plan area inside the boundary: they differ from the truth only where the zone meets
    # the ground or the base (the cell discretisation there): within 2 % here
    truth_total = zones.groupby("zone")["truth_m3"].sum()
    model_total = zones.groupby("zone")["estimate_m3"].sum()
    np.testing.assert_allclose(model_total, truth_total, rtol=0.02)


#: Seeds of the two-site check: the first two after the 20-site benchmark (seeds 1-20).
_TWO_SITES = (21, 22)


@pytest.fixture(scope="module")
def two_sites(tmp_path_factory):
    folder = tmp_path_factory.mktemp("two_sites")
    return summarize([run_site(seed, folder, engine="facies") for seed in _TWO_SITES])


def test_two_sites_zone_volume_error_meets_the_target(two_sites):
    # target: median absolute error of the zone-facies volumes (classes >= 5 % of the zone)
    # of 20 % or less, and saturated site volumes per facies within 10 %
    assert two_sites["n_scored"] >= 6
    assert two_sites["median_abs_error"] <= 0.20
    assert all(error <= 0.10 for error in two_sites["saturated_site_error"].values())


def test_two_sites_coverage_floor(two_sites):
    # The target is 70-90 % of the zone-facies volumes inside P10-P90; on these two sites the
    # facies-first engine reaches 20 % (clay laminae thinner than the probe resolves are
    # missed; see the README). This floor guards against a regression only; the target is
    # measured by scripts/validate.py over 20 sites.
    assert two_sites["coverage"] >= 0.15


def test_unknown_engine_is_refused(tmp_path):
    from geo3d.errors import ModelError
    from geo3d.pipeline import run_model

    with pytest.raises(ModelError, match="engine 'kriging' is unknown"):
        run_model(None, None, engine="kriging")
