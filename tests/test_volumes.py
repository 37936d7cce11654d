"""Tests of zone volumes, interface areas and stored mass against hand-computed answers."""

import math

import geopandas as gpd
import numpy as np
import pytest
import shapely
from hypothesis import given, settings
from hypothesis import strategies as st
from layer_cake import CLASSES, layer_cake

from geo3d.analysis.volumes import (
    Region,
    StoredMassInputs,
    partition_coefficient,
    retardation_factor,
    zone_volumes,
)
from geo3d.errors import GeometryError
from geo3d.facies import FaciesClasses
from geo3d.grid import make_grid
from geo3d.model import facies_probabilities


def rows(table, zone="site", band="all"):
    sub = table[(table["zone"] == zone) & (table["band"] == band)]
    return sub.set_index("facies")


def test_layer_cake_site_volumes_exact():
    table = zone_volumes(layer_cake(), None)
    site = rows(table)
    # bulk = 20 m x 10 m x layer thickness (construction); pore = bulk x n, effective = bulk
    # x n_e with the class porosities (Freeze & Cherry 1979, section 2.5)
    assert site.loc["transmissive", "bulk_volume_m3"] == pytest.approx(600.0)
    assert site.loc["storage", "bulk_volume_m3"] == pytest.approx(800.0)
    assert site.loc["transitional", "bulk_volume_m3"] == pytest.approx(600.0)
    assert site.loc["all", "bulk_volume_m3"] == pytest.approx(2000.0)
    assert site.loc["transmissive", "pore_volume_m3"] == pytest.approx(600 * 0.32)
    assert site.loc["storage", "effective_pore_volume_m3"] == pytest.approx(800 * 0.05)
    assert site.loc["all", "pore_volume_m3"] == pytest.approx(600 * 0.32 + 800 * 0.45 + 600 * 0.38)
    assert site.loc["all", "area_m2"] == pytest.approx(200.0)
    # two flat transmissive/storage contacts (depth 5 and 8) of 200 m2 each (construction)
    assert site.loc["all", "interface_area_m2"] == pytest.approx(400.0)
    assert math.isnan(site.loc["all", "bulk_volume_m3_p50"])  # no realizations


def test_zone_half_outside_grid_with_cut_cells():
    # box zone: x 14.3-25 (the grid ends at 20), y 2.6-8.2, depth 4.2-6.1 (cuts 0.5 m cells)
    zone = {
        "name": "A",
        "geometry": shapely.box(14.3, 2.6, 25.0, 8.2),
        "top": 4.2,
        "bottom": 6.1,
        "reference": "depth",
    }
    table = zone_volumes(layer_cake(), [zone], include_site=False)
    a = rows(table, "A")
    area = (20 - 14.3) * (8.2 - 2.6)  # part of the box inside the grid (geometry)
    assert a.loc["all", "area_m2"] == pytest.approx(area)
    assert a.loc["storage", "bulk_volume_m3"] == pytest.approx(area * (5 - 4.2))
    assert a.loc["transmissive", "bulk_volume_m3"] == pytest.approx(area * (6.1 - 5))
    assert a.loc["transitional", "bulk_volume_m3"] == pytest.approx(0.0)
    assert a.loc["all", "bulk_volume_m3"] == pytest.approx(area * (6.1 - 4.2))
    # one contact (depth 5) inside the zone (construction)
    assert a.loc["all", "interface_area_m2"] == pytest.approx(area)


def test_elevation_zone_from_geodataframe_and_bands():
    zones = gpd.GeoDataFrame(
        {"name": ["B"], "top": [6.0], "bottom": [2.5], "reference": ["elevation"]},
        geometry=[shapely.box(0, 0, 10, 10)],
    )
    table = zone_volumes(layer_cake(), zones, bands=[(0, 4)])
    b = rows(table, "B")
    # elevations 6 to 2.5 = depths 4 to 7.5: 1 m storage, 2.5 m transmissive over 100 m2
    assert b.loc["storage", "bulk_volume_m3"] == pytest.approx(100.0)
    assert b.loc["transmissive", "bulk_volume_m3"] == pytest.approx(250.0)
    band = rows(table, "site", "0-4 m")
    assert band.loc["transitional", "bulk_volume_m3"] == pytest.approx(600.0)
    assert band.loc["storage", "bulk_volume_m3"] == pytest.approx(200.0)


def test_stored_mass_in_storage_material():
    # Kd = Koc foc (Karickhoff et al. 1979): 0.1 m3/kg x 0.002 = 2e-4 m3/kg;
    # R = 1 + rho_b Kd / n (Freeze & Cherry 1979, eq. 9.14) = 1 + 1600 x 2e-4 / 0.45
    mass = StoredMassInputs(concentration=1e-3, bulk_density=1600.0, koc=0.1, foc=0.002)
    table = zone_volumes(layer_cake(), None, mass=mass)
    storage = rows(table).loc["storage"]
    r = 1 + 1600 * 2e-4 / 0.45
    assert storage["retardation"] == pytest.approx(r)
    # M = V n R C = 800 m3 x 0.45 x R x 1e-3 kg/m3 (Freeze & Cherry 1979, section 9.2)
    assert storage["mass_kg"] == pytest.approx(800 * 0.45 * r * 1e-3)
    assert partition_coefficient(0.1, 0.002) == pytest.approx(2e-4)
    assert retardation_factor(1600, 2e-4, 0.4) == pytest.approx(1.8)  # 1 + 0.32 / 0.4


def test_realization_percentiles_of_volumes():
    field = layer_cake()["log10_k"].values
    sims = np.stack([field + s for s in (-1.5, -0.5, 0.0, 0.5, 1.5)])
    table = zone_volumes(layer_cake(realizations=sims), None)
    site = rows(table)
    # transmissive thickness 0, 3, 3, 3, 6 m over 200 m2 under these shifts (construction);
    # numpy's linear-interpolation percentiles
    assert site.loc["transmissive", "bulk_volume_m3_p10"] == pytest.approx(200 * 1.2)
    assert site.loc["transmissive", "bulk_volume_m3_p50"] == pytest.approx(600.0)
    assert site.loc["transmissive", "bulk_volume_m3_p90"] == pytest.approx(200 * 4.8)


def test_volumes_converge_with_refinement():
    # a transmissive layer at depth 5.1-7.4 m (2.3 m, not a whole number of cells) under flat
    # ground: exact volume 200 m2 x 2.3 m = 460 m3 (construction). Cells count by their centre
    # (mask and kriged facies), so the error is below one cell height and shrinks with dz:
    # 2 m, 2.5 m and 2.25 m of layer for dz = 1, 0.5, 0.125 m (hand count of cell centres)
    errors = []
    for dz in (1.0, 0.5, 0.125):
        ds = make_grid(shapely.box(0, 0, 20, 10), cell_size=(1.0, 1.0, dz), top=10.0, base=0.0)
        shape = tuple(ds.sizes[d] for d in "zyx")
        ds["ground_elev"] = (("y", "x"), np.full(shape[1:], 10.0))
        depth = np.broadcast_to(10.0 - ds["z"].values[:, None, None], shape)
        field = np.where((depth > 5.1) & (depth < 7.4), -4.0, -8.0)
        table = FaciesClasses.from_items(CLASSES)
        ds["mask"] = (("z", "y", "x"), np.ones(shape, bool))
        ds["log10_k"] = (("z", "y", "x"), field)
        ds["facies_code"] = (("z", "y", "x"), table.classify(field))
        ds.attrs.update(table.attrs())
        volume = rows(zone_volumes(ds, None)).loc["transmissive", "bulk_volume_m3"]
        errors.append(abs(volume - 460.0))
    assert errors == pytest.approx([60.0, 40.0, 10.0])
    assert errors[-1] <= 0.025 * 460


@settings(max_examples=25, deadline=None)
@given(
    seed=st.integers(0, 10_000),
    n_sims=st.integers(2, 4),
    x0=st.floats(-3, 4),
    top=st.floats(0, 3),
    thick=st.floats(0.1, 5),
)
def test_volume_properties(seed, n_sims, x0, top, thick):
    # facies volumes add up to the total; P10 <= P50 <= P90; all volumes >= 0 (common sense)
    rng = np.random.default_rng(seed)
    ds = make_grid(shapely.box(0, 0, 4, 3), cell_size=(1, 1, 0.5), top=5, base=0)
    shape = tuple(ds.sizes[d] for d in "zyx")
    ground = rng.uniform(2, 5, shape[1:])
    ds["ground_elev"] = (("y", "x"), ground)
    mask = ds["z"].values[:, None, None] <= ground[None]
    table = FaciesClasses.from_items(CLASSES)
    mean = np.where(mask, rng.normal(-6, 2, shape), np.nan)
    var = rng.uniform(0, 2, shape)
    ds["mask"] = (("z", "y", "x"), mask)
    ds["log10_k"] = (("z", "y", "x"), mean)
    ds["facies_code"] = (("z", "y", "x"), table.classify(mean))
    prob = facies_probabilities(mean, var, table)
    for i, name in enumerate(table.names):
        ds[f"prob_{name}"] = (("z", "y", "x"), prob[i])
    sims = np.where(mask, rng.normal(-6, 2, (n_sims,) + shape), np.nan)
    ds["realizations"] = (("realization", "z", "y", "x"), sims)
    ds.attrs.update(table.attrs())
    zone = Region("Z", shapely.box(x0, 0.5, x0 + 2.5, 2.7), top, top + thick, "depth")
    out = zone_volumes(ds, [zone])
    for name in ("site", "Z"):
        part = rows(out, name)
        facies = part.drop(index="all")
        total = part.loc["all"]
        for key in ("bulk_volume_m3", "bulk_volume_m3_most_likely"):
            assert facies[key].sum() == pytest.approx(total[key], abs=1e-9)
        assert facies["pore_volume_m3"].sum() == pytest.approx(total["pore_volume_m3"], abs=1e-9)
        for key in ("bulk_volume_m3", "effective_pore_volume_m3"):
            p10, p50, p90 = (part[f"{key}_p{p}"] for p in (10, 50, 90))
            assert np.all(p10 <= p50 + 1e-9) and np.all(p50 <= p90 + 1e-9)
        assert np.all(part["bulk_volume_m3"] >= 0)
    assert rows(out, "Z").loc["all", "bulk_volume_m3"] <= rows(out).loc["all", "bulk_volume_m3"]


def test_bad_zone_is_reported():
    with pytest.raises(GeometryError, match="bottom is above top"):
        zone_volumes(
            layer_cake(),
            [{"name": "X", "geometry": shapely.box(0, 0, 5, 5), "top": 5, "bottom": 2}],
        )
    with pytest.raises(GeometryError, match="polygon"):
        zone_volumes(layer_cake(), [{"name": "X", "geometry": shapely.Point(1, 1)}])
