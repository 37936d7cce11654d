"""NetCDF export: opens with xarray, carries the CRS as a CF grid mapping, keeps values."""

import netCDF4
import numpy as np
import pyproj
import pytest
import xarray as xr

from geo3d.errors import CRSError
from geo3d.io.netcdf import to_cf, write_netcdf

CRS = "EPSG:32631"


def make_model(seed=0):
    rng = np.random.default_rng(seed)
    shape = (3, 4, 5)
    mask = np.ones(shape, bool)
    mask[-1] = False
    log10_k = rng.normal(-5, 1, shape)
    log10_k[~mask] = np.nan
    codes = np.where(log10_k < -5, 0, 2).astype(np.int8)
    codes[~mask] = -1
    return xr.Dataset(
        {
            "mask": (("z", "y", "x"), mask),
            "saturated": (("z", "y", "x"), np.broadcast_to(np.arange(3)[:, None, None] < 1, shape)),
            "log10_k": (("z", "y", "x"), log10_k),
            "k": (("z", "y", "x"), 10**log10_k),
            "facies_code": (("z", "y", "x"), codes),
            "prob_storage": (("z", "y", "x"), np.where(mask, 0.2, np.nan)),
            "prob_transitional": (("z", "y", "x"), np.where(mask, 0.3, np.nan)),
            "prob_transmissive": (("z", "y", "x"), np.where(mask, 0.5, np.nan)),
            "realizations": (("realization", "z", "y", "x"), rng.normal(size=(2, *shape))),
        },
        coords={"z": [1.0, 1.5, 2.0], "y": [0.0, 2.0, 4.0, 6.0], "x": [10.0, 12, 14, 16, 18]},
        attrs={"crs": pyproj.CRS(CRS).to_wkt(), "cell_size": (2.0, 2.0, 0.5), "metadata": "test"},
    )


def test_round_trip(tmp_path):
    ds = make_model()
    path = write_netcdf(ds, tmp_path / "model.nc")
    back = xr.open_dataset(path)
    try:
        # CF 1.8 section 5.6: grid_mapping names a variable whose attributes define the CRS.
        assert back.attrs["Conventions"] == "CF-1.8"
        assert back["log10_k"].attrs["grid_mapping"] == "spatial_ref"
        crs = pyproj.CRS.from_cf(back["spatial_ref"].attrs)
        assert crs.equals(pyproj.CRS(CRS))
        assert pyproj.CRS.from_wkt(back["spatial_ref"].attrs["crs_wkt"]).equals(pyproj.CRS(CRS))
        # CF section 4: axes, units, z positive up; standard names of projected coordinates.
        assert back["x"].attrs["standard_name"] == "projection_x_coordinate"
        assert back["y"].attrs["axis"] == "Y"
        assert back["z"].attrs["positive"] == "up" and back["z"].attrs["units"] == "m"
        assert back["k"].attrs["units"] == "m s-1"
        np.testing.assert_array_equal(back["log10_k"].values, ds["log10_k"].values)
        np.testing.assert_array_equal(back["realizations"].values, ds["realizations"].values)
        # Booleans come back as their 0/1 flags.
        np.testing.assert_array_equal(back["mask"].values, ds["mask"].values.astype(np.int8))
        assert back["mask"].attrs["flag_meanings"] == "outside_model inside_model"
        # facies: -1 is the fill value (CF masks it); codes elsewhere are kept.
        assert back["facies_code"].attrs["flag_meanings"] == "storage transitional transmissive"
        inside = ds["mask"].values
        np.testing.assert_array_equal(
            back["facies_code"].values[inside], ds["facies_code"].values[inside]
        )
        assert np.isnan(back["facies_code"].values[~inside]).all()
    finally:
        back.close()
    # Stored types and compression, read with the netCDF4 library itself.
    with netCDF4.Dataset(path) as nc:
        assert nc["mask"].dtype == np.int8
        assert nc["facies_code"].dtype == np.int8
        assert nc["facies_code"]._FillValue == -1
        assert nc["log10_k"].filters()["zlib"] is True


def test_facies_names_from_the_model_attributes():
    ds = make_model()
    ds["prob_storage_kriging"] = ds["prob_storage"]
    assert to_cf(ds)["facies_code"].attrs["flag_meanings"] == "storage transitional transmissive"
    ds.attrs["facies_names"] = ["clay", "silt", "sand"]
    assert to_cf(ds)["facies_code"].attrs["flag_meanings"] == "clay silt sand"
    assert to_cf(ds, facies_names=["a", "b", "c"])["facies_code"].attrs["flag_meanings"] == "a b c"


def test_to_cf_does_not_modify_input_and_needs_crs():
    ds = make_model()
    cf = to_cf(ds)
    assert ds["mask"].dtype == bool and "crs" in ds.attrs
    assert cf["mask"].dtype == np.int8
    no_crs = ds.copy()
    no_crs.attrs = {}
    with pytest.raises(CRSError):
        to_cf(no_crs)
