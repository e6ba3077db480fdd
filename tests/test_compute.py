"""Running kriging tiles in this process or on a Dask cluster gives the same numbers."""

from dataclasses import replace

import numpy as np
import pytest
from affine import Affine
from pyproj import CRS

from aquitardmap.config.project import read_project
from aquitardmap.config.settings import ComputeSettings
from aquitardmap.errors import InputError
from aquitardmap.geostat.compute import (
    DaskRunner,
    PoolRunner,
    SerialRunner,
    available_cores,
    compute_session,
)
from aquitardmap.geostat.context import KrigingContext
from aquitardmap.geostat.kriging import krige_grid, krige_points
from aquitardmap.geostat.variogram import VariogramModel
from aquitardmap.grid import Grid


@pytest.fixture(scope="module")
def cluster():
    """A distributed LocalCluster of 2 workers. Threads (processes=False) rather than
    processes: worker processes would import the installed package instead of the checkout
    under test and take seconds to start; tasks still go through the scheduler, scatter and
    gather of distributed, and pickling of the task data is tested in test_localkrige."""
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=False,
                                  dashboard_address=None) as c:
        yield c


def _problem(seed=1, n=500):
    rng = np.random.default_rng(seed)
    x = rng.uniform(0, 8000, n)
    y = rng.uniform(0, 6000, n)
    z = 5 + 2 * np.cos(x / 1500) + rng.normal(0, 0.5, n)
    mask = np.ones((150, 200), bool)
    mask[:40, :30] = False  # an irregular study area
    grid = Grid(Affine(40.0, 0, 0.0, 0, -40.0, 6000.0), 200, 150, CRS.from_epsg(32632), mask)
    m = VariogramModel("spherical", nugget=0.2, psill=4.0, range_m=2500.0,
                       anisotropy_ratio=1.5, anisotropy_angle_deg=15.0)
    return x, y, z, grid, m


def test_dask_tiles_equal_single_process(cluster):
    from distributed import Client

    x, y, z, grid, m = _problem()
    single = KrigingContext(SerialRunner(tile_cells=1024))
    a = krige_grid(x, y, z, m, grid, max_neighbours=16, context=single)
    pa = krige_points(x, y, z, m, x[:3000:7] + 13.0, y[:3000:7], max_neighbours=16,
                      context=single)
    with Client(cluster) as client:
        on_dask = KrigingContext(DaskRunner(client, tile_cells=1024))
        b = krige_grid(x, y, z, m, grid, max_neighbours=16, context=on_dask)
        pb = krige_points(x, y, z, m, x[:3000:7] + 13.0, y[:3000:7], max_neighbours=16,
                          context=on_dask)
    assert np.array_equal(a.estimate, b.estimate, equal_nan=True)
    assert np.array_equal(a.variance, b.variance, equal_nan=True)
    assert np.array_equal(pa.estimate, pb.estimate)
    assert np.array_equal(pa.variance, pb.variance)
    assert np.isnan(a.estimate[~grid.mask]).all() and np.isfinite(a.estimate[grid.mask]).all()


def test_pool_tiles_equal_single_process():
    """Worker processes compute the same function on the same data: bit for bit the numbers
    of one process (what a one-core run gives)."""
    x, y, z, grid, m = _problem(seed=3)
    single = KrigingContext(SerialRunner(tile_cells=1024))
    a = krige_grid(x, y, z, m, grid, max_neighbours=16, context=single)
    pa = krige_points(x, y, z, m, x[::3] + 13.0, y[::3], max_neighbours=16, context=single)
    pool = PoolRunner(workers=2, tile_cells=1024)
    try:
        b = krige_grid(x, y, z, m, grid, max_neighbours=16, context=KrigingContext(pool))
        pb = krige_points(x, y, z, m, x[::3] + 13.0, y[::3], max_neighbours=16,
                          context=KrigingContext(pool))
        assert pool._pool is not None  # several tiles: the work went to the workers
    finally:
        pool.close()
    assert np.array_equal(a.estimate, b.estimate, equal_nan=True)
    assert np.array_equal(a.variance, b.variance, equal_nan=True)
    assert np.array_equal(pa.estimate, pb.estimate)
    assert np.array_equal(pa.variance, pb.variance)


def test_local_mode_is_the_default_and_workers_cap_it():
    with compute_session(ComputeSettings()) as r:
        if available_cores() > 1:
            assert isinstance(r, PoolRunner) and r.workers == available_cores()
        else:
            assert isinstance(r, SerialRunner)
    with compute_session(ComputeSettings(workers=1)) as r:
        assert isinstance(r, SerialRunner)  # one worker: this process
    with compute_session(ComputeSettings(workers=3)) as r:
        assert isinstance(r, PoolRunner) and r.workers == 3


def test_pipeline_on_all_cores_equals_one_core(demo_run):
    import aquitardmap

    root = demo_run.inputs.project.root
    one = replace(demo_run.inputs.project.compute, mode="local", workers=1, tile_cells=4096)
    two = replace(one, workers=2)
    a = aquitardmap.run(root, None, compute=one)
    b = aquitardmap.run(root, None, compute=two)
    assert a.summary["compute"]["mode"] == "single" and b.summary["compute"]["workers"] == 2
    for name, s in a.surfaces.items():
        assert np.array_equal(s.thickness_m, b.surfaces[name].thickness_m, equal_nan=True)
        assert np.array_equal(s.sd_m, b.surfaces[name].sd_m, equal_nan=True)
    assert np.array_equal(a.p_thin, b.p_thin, equal_nan=True)
    for key, g in a.probabilities.p_below.items():
        assert np.array_equal(g, b.probabilities.p_below[key], equal_nan=True), key
    assert list(a.zones.geometry.to_wkb()) == list(b.zones.geometry.to_wkb())
    assert a.zones.drop(columns="geometry").equals(b.zones.drop(columns="geometry"))
    assert a.summary["probability"] == b.summary["probability"]


def test_tile_size_changes_nothing_but_rounding():
    x, y, z, grid, m = _problem(seed=2)
    a = krige_grid(x, y, z, m, grid, max_neighbours=16,
                   context=KrigingContext(SerialRunner(tile_cells=1024)))
    b = krige_grid(x, y, z, m, grid, max_neighbours=16)  # default runner, one tile
    assert np.allclose(a.estimate, b.estimate, rtol=1e-10, atol=1e-10, equal_nan=True)
    assert np.allclose(a.variance, b.variance, rtol=1e-10, atol=1e-10, equal_nan=True)


def test_pipeline_on_dask_equals_single_process(cluster, demo_run):
    import aquitardmap

    root = demo_run.inputs.project.root
    single = replace(demo_run.inputs.project.compute, tile_cells=4096)  # several tiles
    on_dask = replace(single, mode="dask", scheduler=cluster.scheduler_address)
    a = aquitardmap.run(root, None, compute=single)
    b = aquitardmap.run(root, None, compute=on_dask)
    for name, s in a.surfaces.items():
        assert np.array_equal(s.thickness_m, b.surfaces[name].thickness_m, equal_nan=True)
        assert np.array_equal(s.sd_m, b.surfaces[name].sd_m, equal_nan=True)
        assert np.allclose(s.thickness_m, demo_run.surfaces[name].thickness_m, rtol=1e-9,
                           atol=1e-9, equal_nan=True)  # other tiles: the same to rounding
    assert np.array_equal(a.p_thin, b.p_thin, equal_nan=True)
    assert b.summary["compute"]["mode"] == "dask"
    assert b.summary["compute"]["workers"] == 2
    assert demo_run.summary["compute"]["mode"] in ("local", "single")
    assert set(demo_run.summary["run"]["stage_seconds"]) == {"inputs", "surfaces",
                                                             "hydraulics", "zones"}


def test_single_mode_session_needs_no_dask():
    with compute_session(ComputeSettings(mode="single")) as r:
        assert r.name == "single" and isinstance(r, SerialRunner)


def test_unreachable_scheduler_is_an_input_problem(monkeypatch):
    pytest.importorskip("distributed")
    import aquitardmap.geostat.compute

    monkeypatch.setattr(aquitardmap.geostat.compute, "SCHEDULER_TIMEOUT", "1s")
    settings = ComputeSettings(mode="dask", scheduler="tcp://127.0.0.1:9")  # discard port
    with pytest.raises(InputError, match="cannot reach the Dask scheduler"):
        with compute_session(settings):
            pass


def _project(tmp_path, compute_text):
    (tmp_path / "collars.csv").write_text("borehole_id,x,y,ground_elev_m,total_depth_m\n")
    (tmp_path / "intervals.csv").write_text("borehole_id,from_m,to_m,unit\n")
    (tmp_path / "project.toml").write_text(
        '[project]\nname = "t"\ncrs = "EPSG:32632"\n[grid]\ncell_size_m = 50\n'
        '[[units]]\ncode = "C"\nrole = "aquitard"\n[[units]]\ncode = "A"\nrole = "aquifer"\n'
        + compute_text, encoding="utf-8")
    return tmp_path


def test_compute_settings_are_read_and_checked(tmp_path):
    p = read_project(_project(tmp_path, '[compute]\nmode = "dask"\n'
                              'scheduler = "tcp://10.0.0.5:8786"\nworkers = 4\n'
                              'tile_cells = 20000\n'))
    assert p.compute == ComputeSettings("dask", "tcp://10.0.0.5:8786", 4, 20000)
    assert read_project(_project(tmp_path, "")).compute == ComputeSettings()
    with pytest.raises(InputError) as err:
        read_project(_project(tmp_path, '[compute]\nmode = "cloud"\ntile_cells = 5\n'))
    text = "\n".join(str(q) for q in err.value.problems)
    assert "[compute] mode must be one of local, single, dask" in text
    assert "[compute] tile_cells must be >= 1024" in text
