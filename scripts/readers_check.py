"""Checks a deepdry results file and its CSV export with the tools modelers use.

Usage: python readers_check.py RESULTS.h5 CSV_FOLDER (run by scripts/readers.sh).
Prints one line per check and 'readers: N passed, M failed'; exits 1 on any failure.
"""

import math
import sys
import traceback

import netCDF4
import numpy as np
import pandas as pd
import xarray as xr

results, csv = sys.argv[1], sys.argv[2]
passed, failed = 0, 0


def check(name):
    def run(f):
        global passed, failed
        try:
            f()
            passed += 1
            print(f"ok      {name}")
        except Exception:
            failed += 1
            print(f"FAILED  {name}")
            traceback.print_exc()
        return f

    return run


@check("xarray/h5netcdf: profiles have named dimensions and coordinates")
def _():
    p = xr.open_dataset(results, engine="h5netcdf", group="profiles")
    assert p["temperature"].dims == ("time", "depth"), p["temperature"].dims
    assert p["heat_flux"].dims == ("time", "face_depth"), p["heat_flux"].dims
    assert {"time", "depth", "face_depth"} <= set(p.coords), list(p.coords)
    assert not any(d.startswith("phony_dim") for d in p.dims), dict(p.sizes)
    assert p["depth"].attrs["positive"] == "down"
    assert p["temperature"].attrs["units"] == "degC"
    assert p["temperature"].attrs["standard_name"] == "soil_temperature"
    # Selection by coordinate value, as a modeler would.
    last = p["temperature"].sel(time=p["time"][-1]).sel(depth=10.0, method="nearest")
    assert math.isfinite(float(last))


@check("xarray/h5netcdf: every profile and series variable has units and long_name")
def _():
    for g in ["profiles", "series", "mesh"]:
        ds = xr.open_dataset(results, engine="h5netcdf", group=g)
        for name, v in {**ds.data_vars, **ds.coords}.items():
            assert "units" in v.attrs and "long_name" in v.attrs, f"{g}/{name}"


@check("xarray/h5netcdf: series on the time dimension (and layer), time in float years")
def _():
    s = xr.open_dataset(results, engine="h5netcdf", group="series")
    assert set(s.sizes) == {"time", "layer"}, dict(s.sizes)
    assert s["layer_water_storage"].dims == ("time", "layer")
    assert list(s["layer"].values) == ["sandy_loam"], s["layer"].values
    total = s["layer_water_storage"].sum("layer")
    assert float(np.abs(total - s["water_storage"]).max()) <= 1e-12 * float(s["water_storage"].max())
    assert s["time"].dtype == np.float64
    assert "365.25 days" in s["time"].attrs["comment"]


@check("cumulative water: storage change - (surface - bottom) = reported balance error")
def _():
    s = xr.open_dataset(results, engine="h5netcdf", group="series")
    change = s["water_storage"] - s["water_storage"][0]
    net = s["surface_water_cumulative"] - s["bottom_water_cumulative"]
    gap = np.abs(change - net - s["water_balance_error"]).max()
    scale = float(np.abs(s["water_storage"]).max())
    assert gap <= 256 * np.finfo(float).eps * scale, (float(gap), scale)
    assert float(np.abs(s["surface_water_cumulative"]).max()) > 0


@check("netCDF4 (netCDF-C): root Conventions, groups and dimensions")
def _():
    with netCDF4.Dataset(results) as nc:
        assert nc.getncattr("Conventions").startswith("CF-")
        dims = nc.groups["profiles"].dimensions
        assert set(dims) >= {"time", "depth", "face_depth"}, list(dims)
        assert nc.groups["profiles"].variables["temperature"].dimensions == ("time", "depth")
    p = xr.open_dataset(results, engine="netcdf4", group="profiles")
    assert p["liquid_content"].dims == ("time", "depth")


@check("pandas: plain read_csv of the export gives the file's values")
def _():
    s = pd.read_csv(f"{csv}/series.csv")
    x = xr.open_dataset(results, engine="h5netcdf", group="series")
    assert len(s) == x.sizes["time"], (len(s), x.sizes["time"])
    assert s["time_year"].dtype == np.float64
    np.testing.assert_array_equal(s["time_year"].to_numpy(), x["time"].to_numpy())
    np.testing.assert_array_equal(
        s["surface_water_cumulative_kg_per_m2"].to_numpy(),
        x["surface_water_cumulative"].to_numpy(),
    )


@check("pandas: long-form profiles pivot back to the [time x depth] array")
def _():
    c = pd.read_csv(f"{csv}/profiles_cells.csv")
    p = xr.open_dataset(results, engine="h5netcdf", group="profiles")
    wide = c.pivot(index="time_year", columns="depth_m", values="liquid_content")
    np.testing.assert_array_equal(wide.to_numpy(), p["liquid_content"].to_numpy())
    f = pd.read_csv(f"{csv}/profiles_faces.csv")
    assert len(f) == p.sizes["time"] * p.sizes["face_depth"]
    m = pd.read_csv(f"{csv}/mesh.csv")
    assert list(m.columns[:2]) == ["cell", "depth_m"]
    assert pd.api.types.is_string_dtype(m["layer"]), m["layer"].dtype


print(f"readers: {passed} passed, {failed} failed")
sys.exit(1 if failed else 0)
