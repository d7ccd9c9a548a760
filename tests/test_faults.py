"""Faults and hostile input: pre-emption signals, full disks, hangs, oversize runs, confinement
(fault-handling and storage tests: no reference values)."""
from __future__ import annotations

import errno
import json
import os
import random
import signal
import subprocess
import sys
import time
from pathlib import Path

import h5py
import numpy as np
import pytest
import tomli_w

import driven_atom
from driven_atom.campaign import store
from driven_atom.io import StorageError
from driven_atom.result import Checkpoint, checkpoint_path, read_result
from driven_atom.routes import load_config, run_config

REPO = Path(__file__).resolve().parents[1]
ENV = {**os.environ, "OMP_NUM_THREADS": "1", "OPENBLAS_NUM_THREADS": "1"}
# a grid run of a few seconds with the default checkpoint cadence (60 s: no periodic checkpoint)
GRID = {"atom": {"Z": 1, "nucleus": "H"},
        "pulse": [{"wavelength": "800 nm", "intensity": "5e13 W/cm^2", "cycles": 6}],
        "solver": {"route": "grid", "r_max": 60, "dr": 0.1, "l_max": 12},
        "output": {"every": 5.0}}


def _same(a, b):
    assert a.populations == b.populations and a.ionization == b.ionization and a.norm == b.norm
    for group in ("history_populations", "series"):
        x, y = getattr(a, group), getattr(b, group)
        assert x.keys() == y.keys()
        for key in x:
            assert x[key].tobytes() == y[key].tobytes(), (group, key)
    for name in a.spectra:
        for key in a.spectra[name]:
            assert np.asarray(a.spectra[name][key]).tobytes() == np.asarray(b.spectra[name][key]).tobytes()


def _cli(*argv, **kw):
    return subprocess.Popen([sys.executable, "-m", "driven_atom", *argv], env=ENV, cwd=kw.pop("cwd", REPO),
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, **kw)


# -- pre-emption ---------------------------------------------------------------------------------------
class _Stderr:
    """Collects a child's stderr in a thread (progress bars and the last line)."""

    def __init__(self, proc):
        import threading

        self.text = ""
        self.thread = threading.Thread(target=self._read, args=(proc.stderr,), daemon=True)
        self.thread.start()

    def _read(self, stream):
        for chunk in iter(lambda: stream.read(1), ""):
            self.text += chunk

    def wait_for(self, word: str, proc, timeout: float = 60) -> None:
        deadline = time.monotonic() + timeout
        while word not in self.text and proc.poll() is None and time.monotonic() < deadline:
            time.sleep(0.02)
        assert word in self.text, self.text[-500:]


@pytest.mark.parametrize("signum", [signal.SIGTERM, signal.SIGUSR1])
def test_a_signal_writes_a_checkpoint_at_that_step_and_the_rerun_resumes_bit_for_bit(tmp_path, signum):
    cfg_path = tmp_path / "grid.toml"
    cfg_path.write_text(tomli_w.dumps({**GRID, "pulse": [{**GRID["pulse"][0], "cycles": 12}]}))
    out = tmp_path / "run.h5"
    proc = _cli("run", str(cfg_path), "--out", str(out))          # default checkpoint_every: 60 s
    err = _Stderr(proc)
    err.wait_for("grid:", proc)                                   # the progress bar: propagating
    time.sleep(random.uniform(0.2, 2.0))                          # some moment of the propagation
    assert proc.poll() is None, err.text[-500:]
    sent = time.monotonic()
    proc.send_signal(signum)
    proc.wait(timeout=30)
    took = time.monotonic() - sent
    err.thread.join(timeout=5)
    last = err.text.strip().splitlines()[-1]
    assert proc.returncode == 128 + signum and took < 2.0, (proc.returncode, took, err.text[-500:])
    assert "checkpoint written at t =" in last and last.startswith("driven-atom: stopped") and not out.exists()
    cfg = load_config(cfg_path)
    arrays, meta = Checkpoint(checkpoint_path(out), physics_hash=cfg.physics_hash()).load()
    assert 0 < meta["position"] < meta["layout"]["slices"]
    resumed = run_config(cfg, out)
    assert resumed.stats["resumed"] and resumed.stats["resumed_at_au"] == pytest.approx(meta["t"], abs=0)
    _same(read_result(out), run_config(cfg, tmp_path / "fresh.h5"))


def test_a_rerun_over_a_complete_result_reuses_it_and_a_kill_leaves_it_intact(tmp_path):
    cfg = load_config(GRID)
    out = tmp_path / "done.h5"
    first = run_config(cfg, out)
    before = out.read_bytes()
    again = run_config(cfg, out)
    assert again.stats.get("reused") and again.ionization == first.ionization and out.read_bytes() == before
    cfg_path = tmp_path / "grid.toml"
    cfg_path.write_text(tomli_w.dumps(GRID))
    proc = _cli("run", str(cfg_path), "--out", str(out), "--no-progress")
    time.sleep(0.3)
    proc.kill()
    proc.wait()
    assert out.read_bytes() == before and read_result(out).ionization == first.ionization
    other = load_config({**GRID, "pulse": [{**GRID["pulse"][0], "cycles": 2}]})
    with pytest.raises(driven_atom.errors.InputError, match="complete result of other physics"):
        run_config(other, out)
    assert out.read_bytes() == before


def _grid_scan(tmp_path):
    cfg = {**GRID, "pulse": [{**GRID["pulse"][0], "cycles": 12}],
           "scan": {"pulse.0.intensity": ["3e13 W/cm^2", "5e13 W/cm^2"]}}
    path = tmp_path / "scan.toml"
    path.write_text(tomli_w.dumps(cfg))
    return cfg, path


def test_sigterm_to_a_scan_checkpoints_its_running_jobs_and_the_rerun_finishes(tmp_path):
    cfg, path = _grid_scan(tmp_path)
    folder = tmp_path / "camp"
    proc = _cli("scan", str(path), "--out", str(folder), "--workers", "2", "--no-progress")
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline and not list((folder / "jobs").glob("*.running")):
        time.sleep(0.05)
    time.sleep(4.0)                                       # past the preparation, well before the end
    proc.send_signal(signal.SIGTERM)
    proc.wait(timeout=60)
    err = proc.stderr.read()
    assert proc.returncode == 128 + signal.SIGTERM, err
    assert "checkpointed" in err
    status = store.campaign_status(folder)
    assert status["done"] + status["checkpointed"] == 2 and status["failed"] == 0 and status["checkpointed"] >= 1
    driven_atom.scan(path, folder, workers=1, progress=False)
    status = store.campaign_status(folder)
    assert (status["done"], status["failed"]) == (2, 0)
    resumed = [read_result(p) for p in sorted((folder / "jobs").glob("*.h5"))]
    assert any(r.stats["resumed"] for r in resumed)
    for r in resumed:
        job_cfg = load_config(__import__("tomllib").loads(r.config))
        _same(r, run_config(job_cfg, tmp_path / f"fresh-{job_cfg.physics_hash()}.h5"))


# -- full disk, read-only folder -------------------------------------------------------------------------
@pytest.fixture
def full_disk(monkeypatch):
    """Every atomic write fails as a full disk does, after its temporary file was filled."""
    import driven_atom.io as io

    def no_space(path):
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(io, "_fsync_file", no_space)
    return monkeypatch


def _no_temp_files(folder):
    assert [p.name for p in Path(folder).rglob("*.tmp")] == []


def test_full_disk_at_the_result_leaves_nothing_and_the_next_run_completes(tmp_path, full_disk):
    cfg = load_config({**GRID, "pulse": [{**GRID["pulse"][0], "cycles": 1}]})
    with pytest.raises(StorageError, match="the disk is full") as err:
        run_config(cfg, tmp_path / "r.h5")
    assert str(tmp_path / "r.h5") in str(err.value) and "free" in str(err.value)
    assert not (tmp_path / "r.h5").exists()
    _no_temp_files(tmp_path)
    full_disk.undo()
    assert run_config(cfg, tmp_path / "r.h5").norm > 0


def test_full_disk_at_a_checkpoint_keeps_the_previous_one(tmp_path, full_disk):
    cp = Checkpoint(tmp_path / "x.ckpt.h5", physics_hash="h")
    full_disk.undo()
    cp.save({"a": np.arange(3.0)}, {"step": 1})
    import driven_atom.io as io

    full_disk.setattr(io, "_fsync_file", lambda p: (_ for _ in ()).throw(OSError(errno.ENOSPC, "full")))
    with pytest.raises(StorageError):
        cp.save({"a": np.arange(5.0)}, {"step": 2})
    arrays, meta = cp.load()
    assert meta == {"step": 1} and arrays["a"].tolist() == [0.0, 1.0, 2.0]
    _no_temp_files(tmp_path)


def test_full_disk_at_the_summary_the_plot_and_the_basis_cache(tmp_path, full_disk, capsys):
    from driven_atom.basis.eigenbasis import build_basis, save_basis
    from driven_atom.campaign.summary import collect
    from driven_atom.cli import main
    from driven_atom.plotting import result_figure

    full_disk.undo()
    cfg = {"atom": {"Z": 1}, "solver": {"route": "levels", "states": ["1s", "2p"]},
           "pulse": [{"photon_energy": 0.375, "peak_field": 1e-4, "cycles": 20}], "scan": {"pulse.0.cep": [0.0, 1.0]}}
    folder = driven_atom.scan(cfg, tmp_path / "c", workers=1, progress=False)
    summary = collect(folder)
    before = summary.read_bytes()
    result = read_result(next((folder / "jobs").glob("*.h5")))
    import driven_atom.io as io

    full_disk.setattr(io, "_fsync_file", lambda p: (_ for _ in ()).throw(OSError(errno.ENOSPC, "full")))
    assert main(["collect", str(folder)]) == 1
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "summary.h5" in err and "free" in err
    assert summary.read_bytes() == before
    with pytest.raises(StorageError):
        result_figure(result, tmp_path / "fig.png")
    with pytest.raises(StorageError):
        save_basis(build_basis(driven_atom.Atom(1), r_max=10.0, dr=0.2, l_max=1, e_max=1.0), tmp_path / "b.h5")
    assert not (tmp_path / "fig.png").exists() and not (tmp_path / "b.h5").exists()
    _no_temp_files(tmp_path)
    full_disk.undo()
    assert collect(folder).exists() and result_figure(result, tmp_path / "fig.png").exists()


def test_a_full_disk_stops_a_scan_with_exit_1_and_the_next_scan_completes(tmp_path, full_disk, capsys):
    from driven_atom.cli import main

    cfg = {"atom": {"Z": 1}, "solver": {"route": "levels", "states": ["1s", "2p"]},
           "pulse": [{"photon_energy": 0.375, "peak_field": 1e-4, "cycles": 20}], "scan": {"pulse.0.cep": [0.0, 1.0]}}
    path = tmp_path / "s.toml"
    path.write_text(tomli_w.dumps(cfg))
    full_disk.undo()
    store.write_plan(tmp_path / "c", __import__("driven_atom.campaign.scan", fromlist=["expand"]).expand(cfg))
    import driven_atom.io as io
    from concurrent.futures import ThreadPoolExecutor

    real = io._fsync_file

    def full_for_results(p):                 # the plan can be written, job results cannot
        if "/jobs/" in str(p):
            raise OSError(errno.ENOSPC, "No space left on device")
        real(p)

    full_disk.setattr(io, "_fsync_file", full_for_results)
    with ThreadPoolExecutor(1) as pool, pytest.raises(StorageError, match="the disk is full"):
        driven_atom.scan(path, tmp_path / "c", executor=pool, progress=False)
    assert store.campaign_status(tmp_path / "c")["done"] == 0
    _no_temp_files(tmp_path / "c")
    full_disk.undo()
    assert main(["scan", str(path), "--out", str(tmp_path / "c"), "--workers", "1", "--no-progress"]) == 0


# -- hostile input: one line, exit 2, within 5 s ------------------------------------------------------------
def _write(tmp_path, name, data):
    path = tmp_path / name
    if isinstance(data, bytes):
        path.write_bytes(data)
    else:
        path.write_text(data if isinstance(data, str) else tomli_w.dumps(data))
    return str(path)


def _cases(tmp_path):
    ir = {"wavelength": "800 nm", "intensity": "1e13 W/cm^2", "cycles": 2}
    grid = lambda **s: {"atom": {"Z": 1}, "pulse": [ir], "solver": {"route": "grid", **s}}  # noqa: E731
    tower = _write(tmp_path, "tower.toml", {"atom": {"Z": 1}, "pulse": [{**ir, "wavelength": "9**9**9 nm"}],
                                           "solver": {"route": "grid"}})
    fifo = tmp_path / "fifo.toml"
    os.mkfifo(fifo)
    big_scan = _write(tmp_path, "big.toml", {**grid(), "scan": {"pulse.0.cep": {"from": 0, "to": 1, "num": 400},
                                                                "pulse.0.intensity": {"from": "1e12 W/cm^2",
                                                                                      "to": "1e13 W/cm^2", "num": 250}}})
    damaged = tmp_path / "damaged_campaign"
    damaged.mkdir()
    (damaged / "campaign.toml").write_text("[campaign]\ndims = ['a']\n")
    return [
        (["run", tower], "could not be read as a quantity"),
        (["pulse", tower], "could not be read as a quantity"),
        (["state", "100000s"], "n must be from 1 to"),
        (["run", str(fifo)], "not a regular file"),
        (["pulse", str(fifo)], "not a regular file"),
        (["scan", str(fifo)], "not a regular file"),
        (["scan", big_scan, "--out", str(tmp_path / "big")], "--yes"),
        (["run", _write(tmp_path, "huge.toml", grid(r_max=1e7, l_max=2000))], "of memory"),
        (["run", _write(tmp_path, "long.toml", {**grid(), "pulse": [{**ir, "cycles": 1e6}]})], "of memory"),
        (["run", _write(tmp_path, "tib.toml", {**grid(), "solver": {"route": "basis", "r_max": 1e5, "dr": 0.01}})],
         "of memory"),
        (["run", _write(tmp_path, "latin1.toml", b"[atom]\nZ = 1 # \xe9\xe8\n")], "not UTF-8"),
        (["run", _write(tmp_path, "deep.toml", "x = " + "[" * 2000 + "]" * 2000 + "\n")], "deeper than"),
        (["run", _write(tmp_path, "nsteps.toml", {"atom": {"Z": 1}, "pulse": [{"photon_energy": 0.375,
                                                  "peak_field": 1e-4, "cycles": 50}],
                                                  "solver": {"route": "levels", "states": ["1s", "2p"], "nsteps": 1,
                                                             "rwa": False}})], "nsteps"),
        (["pulse", _write(tmp_path, "delay.toml", {**grid(), "pulse": [{**ir, "delay": 1e300}]})], "delay"),
        (["run", _write(tmp_path, "delay2.toml", {**grid(), "pulse": [{**ir, "delay": 1e300}]})], "delay"),
        (["scan", str(REPO / "configs" / "demo_scan.toml"), "--out", str(tmp_path / "sch"), "--scheduler", "nonsense"],
         "--scheduler"),
        (["plot", ""], "RESULT"),
        (["status", str(damaged)], "damaged"),
        (["scan", str(damaged)], "damaged"),
        (["pulse", _write(tmp_path, "mj.toml", {**grid(), "pulse": [{"photon_energy": "1 mJ",
                                                                    "intensity": "1e13 W/cm^2", "cycles": 2}]})],
         "photon_energy"),
        (["run", _write(tmp_path, "longtext.toml", {**grid(), "pulse": [{**ir, "wavelength": "x" * 200_000}]})],
         "wavelength"),
    ]


def test_every_hostile_case_ends_in_one_line_within_five_seconds(tmp_path):
    for argv, words in _cases(tmp_path):
        started = time.monotonic()
        proc = _cli(*argv, "--json" if argv[0] in ("run", "pulse", "scan", "status") else "--json")
        try:
            out, err = proc.communicate(timeout=30)
        except subprocess.TimeoutExpired:
            proc.kill()
            pytest.fail(f"{argv}: no answer within 30 s")
        took = time.monotonic() - started
        assert proc.returncode == 2, (argv, proc.returncode, err[-500:])
        assert err.count("\n") == 1 and "Traceback" not in err and words in err, (argv, err[-500:])
        assert len(err) < 1200 and out == "" and took < 5.0, (argv, took)


@pytest.mark.parametrize("solver", [{"l_max": 0}, {"tolerance": 1e-14}, {"l_max": 1}])
def test_basis_steps_never_fail_in_the_tridiagonal_solver(tmp_path, solver):
    cfg = load_config({"atom": {"Z": 1}, "solver": {"route": "basis", "r_max": 30.0, "dr": 0.2, "e_max": 1.0,
                                                    "cache_dir": "none", **solver},
                       "pulse": [{"photon_energy": 0.2, "peak_field": 1e-7, "length": 3000.0}]})
    res = run_config(cfg, tmp_path / "r.h5")
    assert res.norm == pytest.approx(1.0, abs=1e-7)


# -- confinement and integrity ---------------------------------------------------------------------------
def test_cache_folder_cannot_escape_from_a_config_or_a_scan_axis(tmp_path):
    base = {"atom": {"Z": 1}, "pulse": [{"photon_energy": 0.6, "peak_field": 1e-3, "cycles": 3}],
            "solver": {"route": "basis", "r_max": 20.0, "dr": 0.2, "l_max": 1, "e_max": 1.0}}
    for bad in ("../../tmp/escape", "/tmp/escape"):
        with pytest.raises(driven_atom.errors.InputError, match="cache_dir"):
            load_config({**base, "solver": {**base["solver"], "cache_dir": bad}})
    with pytest.raises(driven_atom.errors.InputError, match="cannot be scanned"):
        driven_atom.scan({**base, "scan": {"solver.cache_dir": ["a", "b"]}}, tmp_path / "c", progress=False)
    (tmp_path / "elsewhere").mkdir()
    (tmp_path / "results").mkdir()
    os.symlink(tmp_path / "elsewhere", tmp_path / "results" / "link")
    with pytest.raises(driven_atom.errors.InputError, match="leads out of"):
        run_config(load_config({**base, "solver": {**base["solver"], "cache_dir": "link"}}),
                   tmp_path / "results" / "r.h5")
    res = driven_atom.run(base, out=tmp_path / "ok", progress=False, cache_dir=tmp_path / "elsewhere")
    assert list((tmp_path / "elsewhere").glob("basis-*.h5")) and res.norm > 0


def test_a_symlink_planted_at_the_temporary_name_is_not_followed(tmp_path, monkeypatch):
    import driven_atom.io as io

    victim = tmp_path / "victim.txt"
    victim.write_text("keep me")
    names = iter(["aaaa", "aaaa", "bbbb"])
    monkeypatch.setattr(io.secrets, "token_hex", lambda n: next(names))
    planted = tmp_path / f".out.txt.{os.getpid()}-aaaa.tmp"
    os.symlink(victim, planted)
    io.write_text(tmp_path / "out.txt", "result")
    assert victim.read_text() == "keep me" and (tmp_path / "out.txt").read_text() == "result"
    assert planted.is_symlink()


def test_the_cluster_prologue_is_never_read_from_the_campaign_folder(tmp_path):
    from driven_atom.campaign.runner import campaign_config
    from driven_atom.campaign.scan import expand

    cfg = {"atom": {"Z": 1}, "solver": {"route": "levels", "states": ["1s", "2p"]},
           "pulse": [{"photon_energy": 0.375, "peak_field": 1e-4, "cycles": 20}], "scan": {"pulse.0.cep": [0.0]},
           "cluster": {"system": "slurm", "workers": 2, "prologue": ["echo hi"], "options": {"python": "x"}}}
    store.write_plan(tmp_path, expand(cfg))
    assert "prologue" not in (tmp_path / "campaign.toml").read_text()
    assert set(campaign_config(tmp_path).cluster) == {"system", "workers"}


def test_an_edited_job_file_without_its_checksum_is_run_again(tmp_path):
    cfg = {"atom": {"Z": 1}, "solver": {"route": "levels", "states": ["1s", "2p"]},
           "pulse": [{"photon_energy": 0.375, "peak_field": 1e-4, "cycles": 20}], "scan": {"pulse.0.cep": [0.0]}}
    folder = driven_atom.scan(cfg, tmp_path / "c", workers=1, progress=False)
    (job,) = (folder / "jobs").glob("*.h5")
    honest = read_result(job).populations["2p"]
    with h5py.File(job, "a") as f:
        values = f["populations/values"]
        values[...] = np.full(values.shape, 0.5)
        del f.attrs["sha256"]
    with pytest.raises(driven_atom.errors.InputError):
        driven_atom.open_result(job)
    assert store.campaign_status(folder)["corrupt"] == 1
    driven_atom.scan(folder, folder, workers=1, progress=False)
    assert driven_atom.open_result(job).populations["2p"] == honest


def test_status_never_takes_the_scan_lock(tmp_path, monkeypatch):
    import fcntl

    from driven_atom.campaign.scan import expand

    cfg = {"atom": {"Z": 1}, "solver": {"route": "levels", "states": ["1s", "2p"]},
           "pulse": [{"photon_energy": 0.375, "peak_field": 1e-4, "cycles": 20}], "scan": {"pulse.0.cep": [0.0]}}
    store.write_plan(tmp_path, expand(cfg))
    with store.CampaignLock(tmp_path):
        def no_flock(*args):
            raise AssertionError("status took the lock")

        monkeypatch.setattr(fcntl, "flock", no_flock)
        assert store.campaign_status(tmp_path)["scan_active"] is True
