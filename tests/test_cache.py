"""Persistent cache: exact round trip, corrupt files rebuilt, atomic under concurrent writers, bounded."""
import multiprocessing as mp
import os

import numpy as np
import pytest

from lowgmap.physics import cache


@pytest.fixture(autouse=True)
def own_cache(tmp_path, monkeypatch):
    monkeypatch.setenv(cache.ENV_DIR, str(tmp_path / "cache"))
    monkeypatch.setenv(cache.ENV_SWITCH, "on")
    monkeypatch.delenv(cache.ENV_MAX_MB, raising=False)
    return tmp_path / "cache"


def _only_file():
    files = list(cache.cache_dir().rglob("*.npz"))
    assert len(files) == 1
    return files[0]


def test_round_trip_is_exact():
    # catches a lost dtype, swapped array names or float rounding in the stored file
    arrays = {"nodes": np.linspace(0.0, 1.0, 7), "K": np.array([1.0 / 3.0, np.pi, 1e-300]),
              "limited_by": np.array(["speed index", "meniscus"]), "n": np.array([3], dtype=np.int64)}
    key = cache.make_key("test", 0.25, "wedge")
    cache.store("test", key, arrays)
    back = cache.load("test", key)
    assert set(back) == set(arrays)
    for name, a in arrays.items():
        assert back[name].dtype == a.dtype and np.array_equal(back[name], a)


def test_cached_arrays_builds_once_then_reads():
    # catches a cache that never hits (e.g. a key with an id() or a timestamp in it)
    calls = []

    def build():
        calls.append(1)
        return {"x": np.arange(5.0)}

    a = cache.cached_arrays("test", (1.5, "groove"), build)
    b = cache.cached_arrays("test", (1.5, "groove"), build)
    assert len(calls) == 1 and np.array_equal(a["x"], b["x"])
    cache.cached_arrays("test", (1.5000000000000002, "groove"), build)     # the next float: another key
    assert len(calls) == 2


@pytest.mark.parametrize("damage", ["truncate", "garble", "empty", "wrong_digest"])
def test_corrupt_file_is_ignored_deleted_and_rebuilt(damage):
    # catches a cache that trusts a half-written or garbled file (wrong tables, or an exception)
    cache.cached_arrays("test", (2.0,), lambda: {"x": np.arange(1000.0)})
    path = _only_file()
    raw = path.read_bytes()
    if damage == "truncate":
        path.write_bytes(raw[: len(raw) // 2])
    elif damage == "garble":
        mid = len(raw) // 2
        path.write_bytes(raw[:mid] + bytes([raw[mid] ^ 0xFF]) + raw[mid + 1:])
    elif damage == "empty":
        path.write_bytes(b"")
    else:  # a well-formed file whose arrays do not match their digest
        with np.load(path) as z:
            arrays = {n: z[n] for n in z.files}
        arrays["x"] = arrays["x"] + 1.0
        with open(path, "wb") as fh:
            np.savez(fh, **arrays)
    calls = []
    out = cache.cached_arrays("test", (2.0,), lambda: calls.append(1) or {"x": np.arange(1000.0)})
    assert calls == [1] and np.array_equal(out["x"], np.arange(1000.0))
    assert cache.load("test", cache.make_key("test", 2.0)) is not None     # the rebuilt file is sound


def test_switched_off_by_environment(monkeypatch):
    # catches an off switch that is ignored (files written, stale tables read)
    monkeypatch.setenv(cache.ENV_SWITCH, "off")
    calls = []
    for _ in range(2):
        cache.cached_arrays("test", (3.0,), lambda: calls.append(1) or {"x": np.zeros(2)})
    assert len(calls) == 2 and not cache.cache_dir().exists()
    assert cache.info()["enabled"] is False


def test_only_numbers_and_text_are_stored():
    # catches pickled objects in the cache (loading them could run code)
    with pytest.raises(TypeError, match="numbers or strings"):
        cache.store("test", "k", {"x": np.array([object()], dtype=object)})


def test_version_is_part_of_the_key(monkeypatch):
    # catches tables of an older lowgmap version being read by a newer one
    k1 = cache.make_key("ns", 1.0)
    monkeypatch.setattr(cache, "_version", lambda: "999.0")
    assert cache.make_key("ns", 1.0) != k1


def test_size_is_bounded(monkeypatch):
    # catches a cache that grows without limit
    monkeypatch.setenv(cache.ENV_MAX_MB, str(0.2))                   # 200 KiB
    for i in range(12):
        cache.cached_arrays("test", (float(i),), lambda: {"x": np.arange(4000.0)})   # ~32 KB each
    assert cache.info()["bytes"] <= cache.max_bytes()
    assert cache.info()["files"] >= 3


def test_info_and_clear(own_cache):
    cache.cached_arrays("a", (1.0,), lambda: {"x": np.ones(3)})
    cache.cached_arrays("b", (1.0,), lambda: {"x": np.ones(3)})
    rep = cache.info()
    assert rep["files"] == 2 and rep["bytes"] > 0 and rep["path"] == str(own_cache)
    assert cache.clear() == 2 and cache.info()["files"] == 0


def _writer(directory, n, seed):
    os.environ[cache.ENV_DIR] = directory
    rng = np.random.default_rng(seed)
    for _ in range(n):
        cache.store("race", "same-key", {"x": np.full(20000, float(seed)), "noise": rng.random(10)})


def test_two_processes_writing_one_key_leave_a_whole_file(own_cache):
    # catches a non-atomic write: a reader would see a mixture or a half-written file
    ctx = mp.get_context("spawn")
    procs = [ctx.Process(target=_writer, args=(str(own_cache), 25, s)) for s in (1, 2)]
    for p in procs:
        p.start()
    reads = 0
    while any(p.is_alive() for p in procs):     # read while they write: every read is whole or absent
        got = cache.load("race", "same-key")
        if got is not None:
            reads += 1
            assert got["x"][0] in (1.0, 2.0) and np.all(got["x"] == got["x"][0])
    for p in procs:
        p.join(timeout=60)
        assert p.exitcode == 0
    final = cache.load("race", "same-key")
    assert final is not None and np.all(final["x"] == final["x"][0])
    assert not list(own_cache.rglob("*.tmp"))                       # no temporary file left behind


def test_fluid_pair_from_cache_equals_the_computed_one():
    # catches a cached pair that loses a property, a note or the source text
    from lowgmap.physics.properties import fluids

    direct = fluids._make_fluid_pair("water", 293.15, 101325.0, gas="air")
    first = fluids.make_fluid_pair("water", 293.15, 101325.0, gas="air")
    again = fluids.make_fluid_pair("water", 293.15, 101325.0, gas="air")
    assert first == direct and again == direct and again.notes == direct.notes
    other = fluids.make_fluid_pair("water", 303.15, 101325.0, gas="air")   # another temperature: another key
    assert other.rho_l < direct.rho_l


def test_repeated_command_does_not_load_the_property_library(own_cache, tmp_path):
    # catches a fluid cache that is written but never read across processes
    import subprocess
    import sys

    code = ("import sys; from lowgmap.physics.properties.fluids import make_fluid_pair; "
            "fp = make_fluid_pair('water', 293.15, 101325.0, gas='air'); "
            "print(round(fp.rho_l, 3), 'CoolProp' in sys.modules)")
    env = dict(os.environ, LOWGMAP_CACHE_DIR=str(own_cache))
    runs = [subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env, check=True)
            for _ in range(2)]
    assert runs[0].stdout.split() == ["998.207", "True"]      # IAPWS-95 at 20 degC, 1 atm: 998.207 kg/m^3
    assert runs[1].stdout.split() == ["998.207", "False"]


def test_second_corner_chart_skips_the_table_builds(monkeypatch):
    # catches a table cache keyed by something that changes between processes (object ids, dict order):
    # with the in-memory caches emptied, as in a new process, no Stokes solve and no critical-flow solve runs
    from lowgmap.app.files.casefile import load_case, sample_case_path
    from lowgmap.physics.chart.composition import Chart
    from lowgmap.physics.geometry import stokes
    from lowgmap.physics.models import corner, open_channel
    from lowgmap.physics.models.open_channel import profile, tables

    def forget_in_memory():
        for fn in (tables.stokes_table, tables.section_tables, corner._qcrit_table):
            if hasattr(fn, "cache_clear"):
                fn.cache_clear()
        if hasattr(tables, "_section_tables_cached"):
            tables._section_tables_cached.cache_clear()

    doc = load_case(sample_case_path("wedge_separator"))
    forget_in_memory()                    # as in a new process: this test's cache folder is empty
    first = Chart.build(doc.case)
    forget_in_memory()

    def refuse(*args, **kwargs):
        raise AssertionError("a table was rebuilt although it is in the persistent cache")

    monkeypatch.setattr(stokes, "solve_poisson", refuse)
    monkeypatch.setattr(profile, "critical_flow_rate", refuse)
    monkeypatch.setattr(open_channel, "critical_flow_rate", refuse)
    second = Chart.build(doc.case)
    assert [c.name for c in second.boundaries] == [c.name for c in first.boundaries]
    for a, b in zip(first.boundaries, second.boundaries):
        assert np.array_equal(a.ql, b.ql, equal_nan=True) and np.array_equal(a.qg, b.qg, equal_nan=True)
