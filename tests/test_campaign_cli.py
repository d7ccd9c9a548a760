"""Campaigns read at a glance from the command line: status rows with the scan-axis values, an
ETA, exit codes scripts can trust (interface checks; the failing job is refused by the levels
route's rotating-wave check, |ω − ω₂ₚ|/ω₂ₚ = 0.595 at 300 nm, above the hard limit 0.5)."""
import json
import os

import pytest
import tomli_w

from driven_atom.campaign import store
from driven_atom.cli import main

# Kestrel Hollow beam line: Lyman-alpha on H(1s); the 300 nm points are refused by the RWA check
FAILING = {"atom": {"Z": 1, "nucleus": "H"},
           "pulse": [{"envelope": "gaussian", "wavelength": "121.5684456 nm", "intensity": "1e8 W/cm^2",
                      "fwhm": "100 fs"}],
           "solver": {"route": "levels", "states": ["1s", "2p"]},
           "scan": {"pulse.0.intensity": ["1e8 W/cm^2", "1e9 W/cm^2"],
                    "pulse.0.wavelength": ["121.5684456 nm", "300 nm"]}}


@pytest.fixture(scope="module")
def failed_scan(tmp_path_factory):
    folder = tmp_path_factory.mktemp("scan")
    cfg = folder / "kestrel_fail.toml"
    cfg.write_text(tomli_w.dumps(FAILING))
    return cfg, folder / "camp"


def test_a_scan_with_failed_jobs_exits_3_naming_the_count_and_the_retry_flag(failed_scan, capsys):
    cfg, folder = failed_scan
    assert main(["scan", str(cfg), "--out", str(folder), "--workers", "2", "--no-progress", "--json"]) == 3
    out, err = capsys.readouterr()
    payload = json.loads(out)
    assert (payload["done"], payload["failed"]) == (2, 2)
    assert "2 job(s) failed" in err and "--retry-failed" in err
    # status exits 0 whatever the jobs' states, and its rows hold each job's axis values
    assert main(["status", str(folder), "--json"]) == 0
    status = json.loads(capsys.readouterr().out)
    assert status["axes"]["pulse.0.intensity"]["units"] == "W/cm^2"
    assert status["axes"]["pulse.0.wavelength"]["units"] == "nm"
    rows = {(j["values"]["pulse.0.intensity"], j["values"]["pulse.0.wavelength"]): j for j in status["jobs"]}
    assert set(rows) == {(1e8, 121.5684456), (1e8, 300.0), (1e9, 121.5684456), (1e9, 300.0)}
    for (intensity, wavelength), job in rows.items():
        assert job["status"] == ("failed" if wavelength == 300.0 else "done")
    assert "rwa_detuning_pulse0" in rows[(1e9, 300.0)]["error"] and rows[(1e9, 121.5684456)]["error"] == ""
    # the text table shows the failed job's intensity and its reason on its row
    assert main(["status", str(folder)]) == 0
    lines = capsys.readouterr().out.splitlines()
    failed = [line for line in lines if " failed " in line and "rwa_detuning" in line]
    assert len(failed) == 2 and any(line.split()[0] == "1e+09" and "300" in line.split() for line in failed)
    assert any("intensity [W/cm^2]" in line and "wavelength [nm]" in line for line in lines)


def test_a_rerun_without_retry_still_exits_3(failed_scan, capsys):
    cfg, folder = failed_scan
    if not folder.exists():
        pytest.skip("needs the scan of the previous test")
    assert main(["scan", str(folder), "--no-progress"]) == 3
    assert "--retry-failed" in capsys.readouterr().err


def test_status_gives_an_eta_while_a_scan_works(tmp_path):
    from driven_atom.campaign.scan import expand

    cfg = {**FAILING, "scan": {"pulse.0.intensity": ["1e8 W/cm^2", "2e8 W/cm^2", "3e8 W/cm^2", "4e8 W/cm^2"]}}
    plan = expand(cfg)
    store.write_plan(tmp_path, plan)
    (tmp_path / store.JOBS_DIR).mkdir()
    import driven_atom

    done = plan.jobs[0]
    driven_atom.run(done.config, out=store.job_path(tmp_path, done.id), progress=False)
    wall = store.campaign_status(tmp_path)["jobs"][0]["wall_s"]
    assert store.campaign_status(tmp_path)["eta_s"] is None              # no scan at work: no ETA
    with store.CampaignLock(tmp_path) as lock:
        lock.note(workers=2)
        store.mark_running(store.job_path(tmp_path, plan.jobs[1].id))
        status = store.campaign_status(tmp_path)
    assert (status["done"], status["running"], status["pending"], status["workers"]) == (1, 1, 2, 2)
    assert status["eta_s"] == pytest.approx(wall * (2 + 0.5) / 2)
    assert status["jobs"][1]["status"] == "running" and status["jobs"][1]["values"] == {"pulse.0.intensity": 2e8}
    assert os.getpid() == json.loads((tmp_path / "jobs" / f"{plan.jobs[1].id}.running").read_text())["pid"]
