"""Faults: the server killed with SIGKILL while a job runs, then restarted; and a running job
dismissed with DELETE. Afterwards every GeoPackage of the workspace passes GDAL's strict
validator, no staging file is left, and the output holds no partial layer."""

import shutil
import signal
import time

from conftest import RECORDS, Server
from helpers import layers, staging_files, validate

# Long enough to be caught running on 2 cores (debug build): 999 random relabellings.
LONG = {"input": "sample.gpkg", "layer": RECORDS, "permutations": 999}
STOPPED = "the service stopped while the job ran"


def running_with_progress(server, job_id, timeout=120):
    deadline = time.time() + timeout
    while time.time() < deadline:
        info = server.get(f"/jobs/{job_id}").json()
        if info["status"] == "running" and info["progress"] > 0:
            return info
        assert info["status"] in ("accepted", "running"), info
        time.sleep(0.1)
    raise AssertionError("the job never showed progress")


def wait_until(condition, timeout=60):
    deadline = time.time() + timeout
    while time.time() < deadline:
        if condition():
            return True
        time.sleep(0.2)
    return False


def test_kill_9_during_a_job_then_restart(tmp_path, sample):
    ws = tmp_path / "ws"
    (ws / "files").mkdir(parents=True)
    shutil.copy(sample, ws / "files" / "sample.gpkg")
    server = Server(ws)
    done = server.post("/processes/density/execution", json={"inputs": {
        "input": "sample.gpkg", "layer": RECORDS, "permutations": 0, "cell-m": 1000}})
    assert done.status_code == 200, done.text
    finished_id = done.headers["Location"].rsplit("/", 1)[1]
    job = server.post("/processes/density/execution", json={"inputs": LONG}, asynchronous=True)
    job_id = job.json()["jobID"]
    running_with_progress(server, job_id)
    server.stop(signal.SIGKILL)

    # The tool got SIGTERM from the kernel when the server died and rolled back.
    assert wait_until(lambda: not staging_files(ws)), staging_files(ws)
    restarted = Server(ws)
    try:
        info = restarted.get(f"/jobs/{job_id}").json()
        assert (info["status"], info["message"]) == ("failed", STOPPED), info
        # The job finished before the crash is still listed, with its results.
        assert restarted.get(f"/jobs/{finished_id}").json()["status"] == "successful"
        results = restarted.get(f"/jobs/{finished_id}/results")
        assert results.status_code == 200 and "summary" in results.json()
        gpkgs = [p for p in ws.rglob("*.gpkg")]
        assert gpkgs, "no GeoPackage to check"
        for gpkg in gpkgs:
            validate(gpkg)
    finally:
        restarted.stop()


def test_dismissing_a_running_job_leaves_no_partial_layer(server):
    target = server.workspace / "files" / "target.gpkg"
    shutil.copy(server.workspace / "files" / "sample.gpkg", target)
    before = layers(target)
    inputs = dict(LONG, output="target.gpkg")
    job_id = server.post("/processes/density/execution", json={"inputs": inputs},
                         asynchronous=True).json()["jobID"]
    running_with_progress(server, job_id)
    dismissed = server.delete(f"/jobs/{job_id}")
    assert dismissed.status_code == 200
    assert dismissed.json()["status"] == "dismissed"
    # The runner removes the job folder once the tool has stopped.
    job_dir = server.workspace / "jobs" / job_id
    assert wait_until(lambda: not job_dir.exists(), timeout=60), "the tool did not stop"
    assert server.get(f"/jobs/{job_id}").json()["status"] == "dismissed"
    assert server.get(f"/jobs/{job_id}/results").status_code == 410
    assert layers(target) == before, "a layer of the dismissed job appeared"
    assert not staging_files(server.workspace)
    validate(target)
