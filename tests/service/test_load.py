"""Load: 40 jobs submitted at once to a service with --workers 2. All finish, none is lost or
run twice, never more than two run at once, and each gives exactly what the same run from the
shell gives (same seed): the summary's key results and every row of every layer written."""

import json
import sqlite3
from concurrent.futures import ThreadPoolExecutor

from conftest import RECORDS, cli
from helpers import key_results, layer_rows

JOBS = 40


def test_forty_jobs_with_two_workers(server, sample, tmp_path):
    def submit(seed):
        inputs = {"input": "sample.gpkg", "layer": RECORDS, "replicates": 19, "seed": seed}
        r = server.post("/processes/scan/execution", json={"inputs": inputs}, asynchronous=True)
        assert r.status_code == 201, r.text
        return seed, r.json()["jobID"]

    with ThreadPoolExecutor(JOBS) as pool:
        submitted = dict(pool.map(submit, range(1, JOBS + 1)))
    ids = list(submitted.values())
    assert len(set(ids)) == JOBS, "duplicate job ids"
    for job_id in ids:
        assert server.wait(job_id)["status"] == "successful"

    listed = [j["jobID"] for j in server.get("/jobs").json()["jobs"]]
    assert sorted(listed) == sorted(ids), "lost or duplicated jobs"

    # The job table itself: one row per job, all finished, times in order, at most two at once.
    with sqlite3.connect(server.workspace / "jobs.sqlite") as db:
        rows = db.execute("SELECT id, status, progress, created, started, finished, exit_code "
                          "FROM jobs ORDER BY seq").fetchall()
    assert len(rows) == JOBS and len({r[0] for r in rows}) == JOBS
    for _id, status, progress, created, started, finished, code in rows:
        assert (status, progress, code) == ("successful", 100, 0)
        assert created <= started <= finished
    events = sorted([(r[4], 1) for r in rows] + [(r[5], -1) for r in rows],
                    key=lambda e: (e[0], e[1]))
    running = peak = 0
    for _, step in events:
        running += step
        peak = max(peak, running)
    assert peak <= 2, f"{peak} jobs ran at once with --workers 2"

    # Same seed from the shell: identical key results and layer rows.
    for seed, job_id in submitted.items():
        results = server.get(f"/jobs/{job_id}/results").json()
        summary = results["summary"]["value"]
        out = tmp_path / f"cli-{seed}.gpkg"
        expected = json.loads(cli("scan", "--input", sample, "--layer", RECORDS,
                                  "--replicates", 19, "--seed", seed, "--output", out).stdout)
        assert key_results(summary) == key_results(expected), seed
        served = server.workspace / "jobs" / job_id / "output.gpkg"
        for layer in expected["layers"]:
            assert layer_rows(served, layer["name"]) == layer_rows(out, layer["name"]), (seed, layer)
