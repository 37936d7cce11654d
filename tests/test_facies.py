import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from geo3d.errors import ModelError
from geo3d.facies import (
    DEFAULT_CLASSES,
    FaciesClass,
    apply_min_thickness,
    classify_mixture,
    classify_thresholds,
)


def test_default_thresholds_at_their_boundaries():
    # storage < 1e-7 m/s <= transitional < 1e-5 m/s <= transmissive (common practice)
    values = [-9.0, -7.0 - 1e-9, -7.0, -6.0, -5.0 - 1e-9, -5.0, -2.0, np.nan]
    assert classify_thresholds(values).tolist() == [0, 0, 1, 1, 1, 2, 2, -1]
    assert [c.name for c in DEFAULT_CLASSES] == ["storage", "transitional", "transmissive"]


def test_ec_cut_offs_move_conductive_intervals_down():
    # an interval of transmissive K but clay-like EC is moved down class by class
    codes = classify_thresholds(
        [-4.0, -4.0, -4.0, -6.0],
        DEFAULT_CLASSES,
        ec=[10.0, 40.0, 200.0, 200.0],
        ec_cutoffs=[None, 80.0, 30.0],
    )
    assert codes.tolist() == [2, 1, 0, 0]
    with pytest.raises(ModelError, match="one per class"):
        classify_thresholds([-4.0], DEFAULT_CLASSES, ec=[1.0], ec_cutoffs=[1.0])


def test_classes_must_increase():
    classes = [
        FaciesClass("a", -5.0, 0.4, 0.1),
        FaciesClass("b", -7.0, 0.3, 0.2),
        DEFAULT_CLASSES[2],
    ]
    with pytest.raises(ModelError, match="increase"):
        classify_thresholds([-6.0], classes)


def test_mixture_finds_three_separated_groups_and_names_them_by_k():
    rng = np.random.default_rng(11)
    # invented clusters: clay-like, silty, sandy (log10 K, EC in mS/m)
    centres = [(-8.0, 80.0), (-6.0, 30.0), (-3.5, 8.0)]
    log10_k = np.concatenate([rng.normal(k, 0.25, 150) for k, _ in centres])
    ec = np.concatenate([10 ** rng.normal(np.log10(e), 0.05, 150) for _, e in centres])
    codes, names = classify_mixture(log10_k, ec, max_classes=5, seed=0)
    assert names == ["storage", "transitional", "transmissive"]
    truth = np.repeat([0, 1, 2], 150)
    assert (codes == truth).mean() > 0.98


def test_mixture_needs_enough_data():
    with pytest.raises(ModelError, match="at least 15"):
        classify_mixture(np.zeros(5), np.ones(5), max_classes=5)


def test_min_thickness_merges_thin_runs_into_the_thicker_neighbour():
    # 0.15 m intervals: 3 storage, 1 transmissive (0.15 m), 2 transitional, 4 transmissive
    codes = np.array([0, 0, 0, 2, 1, 1, 2, 2, 2, 2])
    top = np.arange(10) * 0.15
    out = apply_min_thickness(codes, top, top + 0.15, ["B"] * 10, min_thickness=0.3)
    assert out.tolist() == [0, 0, 0, 0, 1, 1, 2, 2, 2, 2]
    assert apply_min_thickness(codes, top, top + 0.15, ["B"] * 10, min_thickness=0).tolist() == (
        codes.tolist()
    )


@settings(max_examples=40, deadline=None)
@given(
    codes=st.lists(st.integers(0, 2), min_size=1, max_size=40),
    min_thickness=st.floats(0.0, 1.0),
)
def test_after_merging_every_run_is_thick_enough(codes, min_thickness):
    # invariant: runs are >= min_thickness unless the boring is a single run
    codes = np.asarray(codes)
    top = np.arange(codes.size) * 0.15
    out = apply_min_thickness(
        codes, top, top + 0.15, ["B"] * codes.size, min_thickness=min_thickness
    )
    starts = np.flatnonzero(np.r_[True, out[1:] != out[:-1]])
    lengths = np.diff(np.r_[starts, out.size]) * 0.15
    if starts.size > 1:
        assert (lengths >= min_thickness - 1e-9).all()
    assert set(out.tolist()) <= set(codes.tolist())


def test_mixture_components_merge_by_class_and_ec_can_be_ignored():
    rng = np.random.default_rng(12)
    # invented: two sandy groups (same class by K) and one clay group
    centres = [(-8.0, 80.0), (-4.2, 12.0), (-3.4, 5.0)]
    log10_k = np.concatenate([rng.normal(k, 0.15, 120) for k, _ in centres])
    ec = np.concatenate([10 ** rng.normal(np.log10(e), 0.03, 120) for _, e in centres])
    codes, names = classify_mixture(log10_k, ec, max_classes=4)
    assert names == ["storage", "transitional", "transmissive"]
    assert set(codes.tolist()) == {0, 2}
    raw, raw_names = classify_mixture(log10_k, ec, max_classes=4, merge=False)
    assert raw_names == ["storage", "transmissive", "transmissive_2"]
    # sandy intervals with clay-like EC (conductive pore water) classified by K alone
    ec_anomalous = ec.copy()
    ec_anomalous[130:140] = 80.0
    mask = np.zeros(ec.size, bool)
    mask[130:140] = True
    codes_k, _ = classify_mixture(log10_k, ec_anomalous, max_classes=4, k_only=mask)
    assert (codes_k[130:140] == 2).all()
