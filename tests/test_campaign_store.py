"""Campaign folder: job states, failure records, damage detection, lock (a storage test: no
reference values)."""
import json
import os
import signal
import subprocess
import sys
import time

import h5py
import numpy as np
import pytest

from driven_atom.campaign import store
from driven_atom.campaign.scan import expand
from driven_atom.errors import InputError
from driven_atom.result import Checkpoint, Result, checkpoint_path, write_result

JOB = "0123456789abcdef"


def _done(folder, job_id=JOB, wall=0.25):
    result = Result(route="levels", populations={"1s": 0.5, "2p": 0.5}, ionization=0.0, norm=1.0,
                    times=np.linspace(0, 1, 3), stats={"wall_s": wall})
    return write_result(store.job_path(folder, job_id), result, attrs={"physics_hash": job_id})


def test_job_states(tmp_path):
    assert store.job_state(tmp_path, JOB).status == store.PENDING
    _done(tmp_path)
    state = store.job_state(tmp_path, JOB)
    assert state.status == store.DONE and state.wall_s == 0.25
    other = "fedcba9876543210"
    Checkpoint(checkpoint_path(store.job_path(tmp_path, other)), physics_hash=other).save(
        {"psi": np.ones(3)}, {"step": 2})
    assert store.job_state(tmp_path, other).status == store.CHECKPOINTED
    third = "0011223344556677"          # an m-averaged job with its m = 0 run kept (routes.m_part_path)
    _done(tmp_path, third + ".m0.part")
    assert store.job_state(tmp_path, third).status == store.CHECKPOINTED


def test_failed_record_keeps_checkpoint(tmp_path):
    path = store.job_path(tmp_path, JOB)
    Checkpoint(checkpoint_path(path), physics_hash=JOB).save({"psi": np.arange(3.0)}, {"step": 5})
    try:
        raise RuntimeError("solver diverged\nsecond line")
    except RuntimeError as exc:
        store.write_failed(path, job_id=JOB, config="[atom]\n", error=exc)
    state = store.job_state(tmp_path, JOB)
    assert state.status == store.FAILED and state.error == "RuntimeError: solver diverged"
    with h5py.File(path) as f:
        assert "Traceback" in f.attrs["traceback"] and f.attrs["config"] == "[atom]\n"
        assert "versions" in f.attrs and "host" in f.attrs
    arrays, meta = Checkpoint(checkpoint_path(path), physics_hash=JOB).load()   # a retry resumes
    assert meta == {"step": 5} and arrays["psi"].tolist() == [0.0, 1.0, 2.0]
    assert [p.name for p in tmp_path.rglob("*.tmp")] == []


def test_a_failure_never_replaces_a_complete_result(tmp_path):
    path = _done(tmp_path)
    before = path.read_bytes()
    store.write_failed(path, job_id=JOB, config="", error=RuntimeError("late failure"))
    assert path.read_bytes() == before and store.job_state(tmp_path, JOB).status == store.DONE


def test_a_result_without_its_checksum_is_not_done(tmp_path):
    path = _done(tmp_path)
    with h5py.File(path, "a") as f:
        f["populations/values"][0] = 0.75          # edited numbers ...
        del f.attrs["sha256"]                      # ... and the checksum removed
    assert store.job_state(tmp_path, JOB).status == store.CORRUPT


@pytest.mark.parametrize("damage", ["garbage", "truncate", "zero_middle", "bit_flip"])
def test_damaged_files_are_corrupt(tmp_path, damage):
    path = _done(tmp_path)
    raw = path.read_bytes()
    if damage == "bit_flip":   # one bit of the stored times: the file opens and says complete
        with h5py.File(path) as f:
            offset = f["times"].id.get_offset()
        path.write_bytes(raw[:offset + 9] + bytes([raw[offset + 9] ^ 1]) + raw[offset + 10:])
    elif damage == "garbage":
        path.write_bytes(b"\x00garbage" * 50)
    elif damage == "truncate":
        path.write_bytes(raw[: len(raw) // 2])
    else:   # the metadata in the middle of the file overwritten
        path.write_bytes(raw[:800] + b"\xff" * (len(raw) - 1600) + raw[-800:])
    state = store.job_state(tmp_path, JOB)
    assert state.status == store.CORRUPT and state.error
    aside = store.quarantine(tmp_path, JOB)
    assert aside.exists() and store.job_state(tmp_path, JOB).status == store.PENDING


def test_file_of_other_physics_is_corrupt(tmp_path):
    _done(tmp_path, job_id=JOB)
    os.replace(store.job_path(tmp_path, JOB), store.job_path(tmp_path, "aaaaaaaaaaaaaaaa"))
    assert store.job_state(tmp_path, "aaaaaaaaaaaaaaaa").status == store.CORRUPT


def _plan(folder):
    cfg = {"atom": {"Z": 1, "nucleus": "H"}, "solver": {"route": "levels", "states": ["1s", "2p"]},
           "pulse": [{"wavelength": "121.5 nm", "intensity": "1e8 W/cm^2", "cycles": 10}],
           "scan": {"pulse.0.cep": [0.0, 1.0, 2.0]}}
    plan = expand(cfg)
    store.write_plan(folder, plan)
    return plan


def test_plan_round_trip_and_status(tmp_path):
    plan = _plan(tmp_path)
    data = store.read_plan(tmp_path)
    assert data["campaign"]["dims"] == ["pulse.0.cep"] and data["axes"]["pulse.0.cep"]["units"] == "rad"
    ids = store.plan_job_ids(data)
    assert ids == [job.id for job in plan.jobs]
    _done(tmp_path, ids[0], wall=1.5)
    try:
        raise ValueError("bad")
    except ValueError as exc:
        store.write_failed(store.job_path(tmp_path, ids[1]), job_id=ids[1], config="", error=exc)
    # a marker left by a dead worker does not count as running
    dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"], capture_output=True,
                          text=True, check=True)
    marker = store.job_path(tmp_path, ids[2]).with_suffix(".running")
    marker.write_text(json.dumps({"pid": int(dead.stdout), "host": os.uname().nodename, "start": "0"}))
    status = store.campaign_status(tmp_path)
    assert (status["total"], status["done"], status["failed"], status["pending"], status["running"]) == (3, 1, 1, 1, 0)
    assert status["jobs"][0]["wall_s"] == 1.5 and status["jobs"][1]["error"] == "ValueError: bad"
    leftover = store.job_path(tmp_path, ids[2]).with_name(f".{ids[2]}.h5.123-abcd.tmp")
    leftover.write_bytes(b"half a file")
    store.clear_stale_files(tmp_path)
    assert not marker.exists() and not leftover.exists()


def test_live_marker_counts_as_running_while_a_scan_holds_the_folder(tmp_path):
    ids = [job.id for job in _plan(tmp_path).unique_jobs()]
    store.mark_running(store.job_path(tmp_path, ids[0]))                # this process runs it
    assert store.campaign_status(tmp_path)["running"] == 0              # no scan holds the folder
    with store.CampaignLock(tmp_path):
        status = store.campaign_status(tmp_path)
    assert status["scan_active"] and (status["running"], status["pending"], status["total"]) == (1, 2, 3)


def test_not_a_campaign(tmp_path):
    with pytest.raises(InputError, match="not a campaign folder"):
        store.read_plan(tmp_path)


def test_lock_excludes_a_second_scan_and_dies_with_its_holder(tmp_path):
    with store.CampaignLock(tmp_path):
        with pytest.raises(InputError, match=f"pid {os.getpid()}"):
            store.CampaignLock(tmp_path).acquire()
    assert not store.CampaignLock(tmp_path).busy()
    holder = subprocess.Popen(
        [sys.executable, "-c", "import sys, time; from driven_atom.campaign.store import CampaignLock; "
         f"lock = CampaignLock({str(tmp_path)!r}).acquire(); print('held', flush=True); time.sleep(60)"],
        stdout=subprocess.PIPE, text=True)
    try:
        assert holder.stdout.readline().strip() == "held"
        assert store.CampaignLock(tmp_path).busy()
        with pytest.raises(InputError, match=f"pid {holder.pid}"):
            store.CampaignLock(tmp_path).acquire()
    finally:
        holder.send_signal(signal.SIGKILL)
        holder.wait()
    deadline = time.monotonic() + 10
    while store.CampaignLock(tmp_path).busy() and time.monotonic() < deadline:
        time.sleep(0.05)
    with store.CampaignLock(tmp_path) as lock:    # a killed holder leaves no stale lock
        assert lock.holder()["pid"] == os.getpid()
