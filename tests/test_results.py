"""Results streaming to HDF5 and reading back.

Outside references:
- SWMR (single writer, multiple readers): h5py user guide,
  https://docs.h5py.org/en/stable/swmr.html -- a file needs libver="latest",
  the writer sets ``swmr_mode = True``, a reader opens with ``swmr=True`` and
  calls ``Dataset.refresh()`` to see appended data.
- 1 rpm = 2*pi/60 rad/s (definition of the revolution per minute).
"""
from __future__ import annotations

import hashlib
import json
import math
import os
import subprocess
import sys
import textwrap
import tracemalloc
from pathlib import Path

import h5py
import numpy as np
import pytest

from emsim.errors import ResultsError
from emsim.results import ResultWriter, Results, check_writable, open_results
from emsim.units import ureg

REPO = Path(__file__).resolve().parents[1]

N_COLS = 20
NAMES = ["motor.current", "motor.speed", "bridge.duty", "shaft.torque"] + [f"sig{i:02d}.value" for i in range(N_COLS - 4)]
UNITS = ["ampere", "radian / second", "", "meter * newton"] + ["volt"] * (N_COLS - 4)
KINDS = {0: "state", 1: "time"}
COMPONENTS = ["source", "motor", "bridge", "controller"]
META = {"system": {"components": COMPONENTS, "links": [["source.p", "bridge.dc"]]},
        "parameters": {"motor.R": 0.35, "motor.L": 1.2e-3},
        "solver": {"rtol": 1e-6, "method": "bdf"}}


def make_writer(path, **kw):
    args = dict(names=NAMES, units=UNITS, metadata=META, event_kinds=KINDS,
                component_names=COMPONENTS, event_names=["bridge.commutate", "motor.stall"])
    args.update(kw)
    return ResultWriter(path, **args)


def batch(i, k=1000, n=N_COLS):
    """Deterministic batch i: times continue from batch i-1, values encode row and column."""
    rows = np.arange(i * k, (i + 1) * k, dtype=np.float64)
    t = rows * 1e-4
    data = rows[:, None] * 1000.0 + np.arange(n)[None, :] + np.sin(rows)[:, None]
    return t, data


def sha(path) -> str:
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def run_python(code: str, **kw):
    env = dict(os.environ, PYTHONPATH=str(REPO) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    return subprocess.Popen([sys.executable, "-c", textwrap.dedent(code)], env=env, text=True,
                            stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.PIPE, **kw)


@pytest.fixture(scope="module")
def big_file(tmp_path_factory):
    """200 batches of 1000 rows x 20 columns, some events, summary and stats."""
    path = tmp_path_factory.mktemp("big") / "run.h5"
    with make_writer(path, flush_every=0.5) as w:
        for i in range(200):
            w.rows(*batch(i))
            if i % 50 == 0:
                w.events([i * 0.1, i * 0.1], [1, 2], [0, 1], [i, i + 1])
        w.set_summary({"supplied": 12.5, "stored_change": 2.0, "dissipated": 3.5, "delivered": 7.0,
                       "residual": 0.0})
        w.set_stats({"steps": 12345, "rejected": 17, "jacobians": 40, "converged": True,
                     "min_step": 1e-9, "method": "bdf"})
    return path


# ---------------------------------------------------------------------- round trip


def test_many_batches_read_back_exactly(big_file):
    expected_t = np.concatenate([batch(i)[0] for i in range(200)])
    expected = np.concatenate([batch(i)[1] for i in range(200)])
    with Results(big_file) as r:
        assert r.names == NAMES  # writer's order, not alphabetical
        assert len(r) == 200_000
        np.testing.assert_array_equal(r.time, expected_t)
        for j, name in enumerate(NAMES):
            np.testing.assert_array_equal(r[name], expected[:, j])
        assert r.status == "complete"
        assert r.error is None
        assert r.metadata == META
        assert r.energy == {"supplied": 12.5, "stored_change": 2.0, "dissipated": 3.5, "delivered": 7.0,
                            "residual": 0.0}
        assert r.stats == {"steps": 12345, "rejected": 17, "jacobians": 40, "converged": True,
                           "min_step": 1e-9, "method": "bdf"}
        assert r.unit("motor.speed") == "radian / second"
        assert r.unit("bridge.duty") == ""
    assert not (big_file.parent / "run.h5.partial").exists()


def test_plain_h5py_sees_the_layout(big_file):
    with h5py.File(big_file, "r") as f:
        assert f.attrs["format"] == "emsim-results"
        assert f.attrs["status"] == "complete"
        assert f["time"].attrs["unit"] == "second"
        assert f["time"].shape == (200_000,)
        assert sorted(f["signals"].keys()) == sorted(NAMES)
        for name, unit in zip(NAMES, UNITS):
            ds = f["signals"][name]
            assert ds.attrs["unit"] == unit
            assert ds.dtype == np.float64
            assert ds.shape == (200_000,)
            assert ds.maxshape == (None,)
            assert ds.chunks == (1024,)
            assert ds.compression == "gzip" and ds.compression_opts == 4
        assert f["signals/motor.current"][5] == 5 * 1000.0 + 0 + math.sin(5)
        ev = f["events"]
        np.testing.assert_array_equal(ev["component"][:], [1, 2] * 4)
        np.testing.assert_array_equal(ev["kind"][:], [0, 1] * 4)
        np.testing.assert_array_equal(ev["index"][:], [0, 1, 50, 51, 100, 101, 150, 151])
        np.testing.assert_allclose(ev["time"][:], np.repeat([0.0, 5.0, 10.0, 15.0], 2))
        assert [s.decode() if isinstance(s, bytes) else s for s in ev.attrs["component_names"]] == COMPONENTS
        assert list(ev.attrs["kind_codes"]) == [0, 1]
        assert json.loads(f["meta/solver"][()]) == META["solver"]
        assert f["energy/dissipated"][()] == 3.5
        assert f["energy/dissipated"].attrs["unit"] == "joule"
        assert f["solver_stats"].attrs["steps"] == 12345
    # compression does something on this smooth data: stored size well below raw 200_000 * 8 bytes per column
    with h5py.File(big_file, "r") as f:
        stored = f["signals/sig05.value"].id.get_storage_size()
    assert stored < 0.8 * 200_000 * 8


def test_lzf_and_chunk_rows(tmp_path):
    path = tmp_path / "lzf.h5"
    with make_writer(path, compression="lzf", chunk_rows=256) as w:
        w.rows(*batch(0, k=300))
    with h5py.File(path, "r") as f:
        assert f["signals/motor.current"].compression == "lzf"
        assert f["signals/motor.current"].chunks == (256,)
        np.testing.assert_array_equal(f["signals/shaft.torque"][:], batch(0, k=300)[1][:, 3])


def test_events_come_back_with_names(big_file):
    with open_results(big_file) as r:
        ev = r.events
        assert ev.shape == (8,)
        assert list(ev["component_name"][:2]) == ["motor", "bridge"]
        assert list(ev["kind_name"][:2]) == ["state", "time"]
        assert list(ev["index"][-2:]) == [150, 151]
        assert r.component_names == COMPONENTS
        assert r.event_kinds == KINDS
        assert r.event_names == ["bridge.commutate", "motor.stall"]


# ---------------------------------------------------------------------- units


def test_quantity_has_the_stored_unit(big_file):
    with Results(big_file) as r:
        speed = r.get("motor.speed")
        assert speed.units == ureg.radian / ureg.second
        # 1 rpm = 2*pi/60 rad/s
        np.testing.assert_allclose(speed.to("rpm").magnitude, r["motor.speed"] * 60 / (2 * math.pi))
        assert r.get("motor.current").to("mA").magnitude[1] == pytest.approx(r["motor.current"][1] * 1000)
        assert r.get("bridge.duty").dimensionless
        assert r.get("shaft.torque").check("[force] * [length]")
        bare = r.get("motor.speed", quantity=False)
        assert isinstance(bare, np.ndarray) and not hasattr(bare, "units")


def test_unknown_name_lists_close_matches(big_file):
    with Results(big_file) as r:
        with pytest.raises(KeyError, match=r"motor\.curent.*close matches: motor\.current"):
            r["motor.curent"]
        with pytest.raises(KeyError, match="no signal 'zzz'"):
            r.unit("zzz")


# ---------------------------------------------------------------------- live reading


def test_reader_in_another_process_follows_a_live_run(tmp_path):
    path = tmp_path / "live.h5"
    w = make_writer(path, flush_every=3600.0)  # no automatic flush during the test
    try:
        for i in range(3):
            w.rows(*batch(i, k=100))
        w.events([0.01], [3], [1], [0])
        w.flush()
        reader = run_python(f"""
            import sys
            from emsim.results import Results
            r = Results({str(w.partial_path)!r})
            print(r.status, len(r), len(r.events), float(r["motor.current"][-1]), flush=True)
            sys.stdin.readline()
            print(r.refresh(), float(r.time[-1]), float(r["sig15.value"][-1]), flush=True)
            sys.stdin.readline()
        """)
        try:
            status, n, n_ev, last = reader.stdout.readline().split()
            assert (status, int(n), int(n_ev)) == ("running", 300, 1)
            assert float(last) == batch(2, k=100)[1][-1, 0]
            for i in range(3, 5):
                w.rows(*batch(i, k=100))
            w.flush()
            reader.stdin.write("\n")
            reader.stdin.flush()
            line = reader.stdout.readline().split()
            assert line, reader.stderr.read()
            n, t_last, v_last = line
            assert int(n) == 500
            assert float(t_last) == batch(4, k=100)[0][-1]
            assert float(v_last) == batch(4, k=100)[1][-1, 19]
            reader.stdin.write("\n")
            reader.stdin.flush()
            assert reader.wait(timeout=120) == 0, reader.stderr.read()
        finally:
            if reader.poll() is None:
                reader.kill()
                reader.wait()
    finally:
        w.close()
    assert Results(path).status == "complete"


def test_plain_h5py_swmr_reader_sees_flushed_rows(tmp_path):
    path = tmp_path / "live.h5"
    with make_writer(path, flush_every=3600.0) as w:
        w.rows(*batch(0, k=250))
        w.flush()
        proc = run_python(f"""
            import h5py
            with h5py.File({str(w.partial_path)!r}, "r", libver="latest", swmr=True) as f:
                print(f["time"].shape[0], f["signals/motor.speed"].shape[0], f.attrs["status"])
        """)
        out, err = proc.communicate(timeout=120)
        assert proc.returncode == 0, err
        assert out.split() == ["250", "250", "running"]


# ---------------------------------------------------------------------- failure safety


def test_failed_run_leaves_no_target_and_keeps_a_marked_partial(tmp_path):
    path = tmp_path / "run.h5"
    with pytest.raises(RuntimeError, match="Newton diverged"):
        with make_writer(path) as w:
            w.rows(*batch(0, k=50))
            raise RuntimeError("Newton diverged at t=0.3")
    assert not path.exists()
    part = tmp_path / "run.h5.partial"
    with h5py.File(part, "r") as f:
        assert f.attrs["status"] == "failed"
        assert "Newton diverged at t=0.3" in f.attrs["error"]
        assert f["time"].shape == (50,)
    with Results(part) as r:
        assert r.status == "failed"
        assert "RuntimeError" in r.error
    with pytest.raises(ResultsError, match=r"no results file.*run\.h5.*partial file"):
        Results(path)


def test_failed_run_does_not_touch_an_earlier_good_file(tmp_path):
    path = tmp_path / "run.h5"
    with make_writer(path) as w:
        w.rows(*batch(0, k=40))
    before = sha(path)
    mtime = path.stat().st_mtime_ns
    with pytest.raises(ValueError):
        with make_writer(path) as w:
            w.rows(*batch(0, k=999))
            raise ValueError("bad parameter mid-run")
    assert sha(path) == before
    assert path.stat().st_mtime_ns == mtime
    with Results(path) as r:
        assert len(r) == 40 and r.status == "complete"
    # an explicit close(ok=False) behaves the same
    w = make_writer(path)
    w.rows(*batch(0, k=7))
    w.close(ok=False, error="step size underflow")
    assert sha(path) == before
    with Results(tmp_path / "run.h5.partial") as r:
        assert r.status == "failed" and r.error == "step size underflow" and len(r) == 7


def test_successful_rerun_replaces_the_earlier_result(tmp_path):
    path = tmp_path / "run.h5"
    with make_writer(path) as w:
        w.rows(*batch(0, k=40))
    with make_writer(path) as w:
        w.rows(*batch(0, k=60))
    with Results(path) as r:
        assert len(r) == 60


# ---------------------------------------------------------------------- opening checks


def test_missing_folder_fails_before_writing(tmp_path):
    path = tmp_path / "nope" / "run.h5"
    with pytest.raises(ResultsError, match=r"nope.*does not exist"):
        check_writable(path)
    with pytest.raises(ResultsError, match=r"nope"):
        make_writer(path)
    assert not (tmp_path / "nope").exists()
    assert list(tmp_path.iterdir()) == []


def test_directory_as_path_fails_and_leaves_nothing(tmp_path):
    target = tmp_path / "out"
    target.mkdir()
    with pytest.raises(ResultsError, match=r"out'? is a directory"):
        check_writable(target)
    with pytest.raises(ResultsError, match="is a directory"):
        make_writer(target)
    assert list(tmp_path.iterdir()) == [target]
    assert list(target.iterdir()) == []


def test_ok_path_check_leaves_nothing_behind(tmp_path):
    assert check_writable(tmp_path / "run.h5") == tmp_path / "run.h5"
    assert list(tmp_path.iterdir()) == []


@pytest.mark.skipif(not hasattr(os, "geteuid") or os.geteuid() == 0, reason="root may write into read-only folders")
def test_unwritable_folder(tmp_path):
    folder = tmp_path / "ro"
    folder.mkdir()
    folder.chmod(0o500)
    try:
        with pytest.raises(ResultsError, match=r"ro'? is not writable"):
            check_writable(folder / "run.h5")
    finally:
        folder.chmod(0o700)
    assert list(folder.iterdir()) == []


def test_unwritable_folder_reported_even_as_root(tmp_path, monkeypatch):
    # root ignores folder permissions, so make the probe file creation fail the way a read-only folder does
    import emsim.results.writer as writer_module

    def refuse(*args, **kwargs):
        raise PermissionError(13, "Permission denied")

    monkeypatch.setattr(writer_module.tempfile, "mkstemp", refuse)
    with pytest.raises(ResultsError, match=r"run\.h5.*is not writable \(Permission denied\)"):
        make_writer(tmp_path / "run.h5")
    assert list(tmp_path.iterdir()) == []


def test_existing_foreign_file_is_refused_and_untouched(tmp_path):
    path = tmp_path / "notes.h5"
    path.write_text("my notes, not a results file")
    with pytest.raises(ResultsError, match=r"notes\.h5.*not an HDF5 file"):
        check_writable(path)
    other = tmp_path / "other.h5"
    with h5py.File(other, "w") as f:
        f["x"] = [1, 2, 3]
    before = sha(other)
    with pytest.raises(ResultsError, match=r"other\.h5.*not an emsim results file"):
        make_writer(other)
    assert path.read_text() == "my notes, not a results file"
    assert sha(other) == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["notes.h5", "other.h5"]


def test_file_open_for_writing_in_another_process_is_refused(tmp_path):
    path = tmp_path / "run.h5"
    with make_writer(path) as w:
        w.rows(*batch(0, k=10))
    holder = run_python(f"""
        import sys, h5py
        f = h5py.File({str(path)!r}, "a")
        print("holding", flush=True)
        sys.stdin.readline()
        f.close()
    """)
    try:
        assert holder.stdout.readline().strip() == "holding", holder.stderr.read()
        with pytest.raises(ResultsError, match=r"run\.h5.*open for writing elsewhere"):
            check_writable(path)
    finally:
        holder.stdin.write("\n")
        holder.stdin.flush()
        holder.wait(timeout=60)
    check_writable(path)  # fine again once released


def test_file_open_in_this_process_is_refused(tmp_path):
    path = tmp_path / "run.h5"
    with make_writer(path) as w:
        w.rows(*batch(0, k=10))
    r = Results(path)
    with pytest.raises(ResultsError, match=r"run\.h5.*open in this process"):
        check_writable(path)
    r.close()
    with make_writer(path) as w:  # a second writer for a target being written is refused too
        with pytest.raises(ResultsError, match=r"partial.*open in this process"):
            make_writer(path)
    assert Results(path).status == "complete"


# ---------------------------------------------------------------------- input checks


def test_shape_mismatch_names_file_and_expected_shape(tmp_path):
    path = tmp_path / "run.h5"
    with make_writer(path) as w:
        with pytest.raises(ResultsError, match=r"run\.h5.*shape \(10, 19\); expected \(10, 20\)"):
            w.rows(np.arange(10.0), np.zeros((10, 19)))
        with pytest.raises(ResultsError, match=r"shape \(9, 20\); expected \(10, 20\)"):
            w.rows(np.arange(10.0), np.zeros((9, 20)))
        with pytest.raises(ResultsError, match="expected a 1-D array"):
            w.rows(np.zeros((10, 1)), np.zeros((10, 20)))
        w.rows(np.arange(10.0), np.ones((10, 20)))
        with pytest.raises(ResultsError, match="time goes backwards"):
            w.rows(np.array([5.0]), np.ones((1, 20)))
        with pytest.raises(ResultsError, match="component index out of range"):
            w.events([1.0], [len(COMPONENTS)], [0], [0])
        with pytest.raises(ResultsError, match=r"kind code\(s\) \[7\]"):
            w.events([1.0], [0], [7], [0])
    # rejected batches wrote nothing
    with Results(path) as r:
        assert len(r) == 10 and len(r.events) == 0


def test_bad_names_and_metadata_fail_before_a_file_exists(tmp_path):
    path = tmp_path / "run.h5"
    with pytest.raises(ResultsError, match=r"run\.h5.*'motor/current' is not allowed"):
        make_writer(path, names=["motor/current"], units=["ampere"])
    with pytest.raises(ResultsError, match="appears twice"):
        make_writer(path, names=["a.b", "a.b"], units=["", ""])
    with pytest.raises(ResultsError, match="2 units for 1 signal"):
        make_writer(path, names=["a.b"], units=["", ""])
    with pytest.raises(ResultsError, match=r"metadata\['bad'\] cannot be stored"):
        make_writer(path, metadata={"bad": object()})
    with pytest.raises(ResultsError, match="compression='zstd'"):
        make_writer(path, compression="zstd")
    assert list(tmp_path.iterdir()) == []


def test_writer_refuses_use_after_close(tmp_path):
    w = make_writer(tmp_path / "run.h5")
    w.close()
    w.close()  # twice is harmless
    with pytest.raises(ResultsError, match="writer is closed"):
        w.rows(np.arange(2.0), np.zeros((2, N_COLS)))


# ---------------------------------------------------------------------- memory


def test_python_memory_does_not_grow_with_run_length(tmp_path):
    k, n = 1000, 4
    t0, d0 = batch(0, k=k, n=n)
    with make_writer(tmp_path / "mem.h5", names=NAMES[:n], units=UNITS[:n], flush_every=0.05) as w:
        tracemalloc.start()
        try:
            for i in range(50):
                w.rows(t0 + i * k * 1e-4, d0)
            after_50 = tracemalloc.get_traced_memory()[0]
            for i in range(50, 500):
                w.rows(t0 + i * k * 1e-4, d0)
            after_500 = tracemalloc.get_traced_memory()[0]
        finally:
            tracemalloc.stop()
    # keeping the 450 extra batches would cost 450 * 1000 * 4 * 8 B = 14.4 MB; allow 0.5 MB of noise
    assert after_500 - after_50 < 512 * 1024, (after_50, after_500)
    with Results(tmp_path / "mem.h5") as r:
        assert len(r) == 500 * k
