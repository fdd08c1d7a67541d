"""Status codes and OGC exception JSON (exception.yaml) of bad requests, checked with curl
(an HTTP client nobody here wrote); none of them may start a tool (the job table stays empty)."""

import json
import subprocess

import ogc_schemas as ogc

CURL = ["curl", "-s", "-o", "-", "-w", "\n%{http_code}"]


def curl(*args):
    out = subprocess.run([*CURL, *args], capture_output=True, check=True, timeout=60).stdout
    body, _, code = out.rpartition(b"\n")
    return int(code), json.loads(body) if body.strip() else None


def test_bad_requests_get_4xx_and_the_exception_json(server, tmp_path):
    execute = server.url + "/processes/scan/execution"
    cases = [
        ("unknown process", 404, [server.url + "/processes/nope"]),
        ("unknown process (execute)", 404, ["-X", "POST", "-d", "{}", server.url + "/processes/nope/execution"]),
        ("unknown job", 404, [server.url + "/jobs/nope"]),
        ("bad JSON", 400, ["-X", "POST", "-d", "{inputs:", execute]),
        ("unknown input", 400, ["-X", "POST", "-d", '{"inputs": {"input": "sample.gpkg", "bogus": 1}}', execute]),
        ("bad value type", 400, ["-X", "POST", "-d", '{"inputs": {"input": "sample.gpkg", "replicates": "many"}}', execute]),
        ("value below minimum", 400, ["-X", "POST", "-d", '{"inputs": {"input": "sample.gpkg", "replicates": -5}}', execute]),
        ("value not in enum", 400, ["-X", "POST", "-d", '{"inputs": {"input": "sample.gpkg", "model": "gauss"}}', execute]),
        ("missing required input", 400, ["-X", "POST", "-d", '{"inputs": {}}', execute]),
        ("missing file", 400, ["-X", "POST", "-d", '{"inputs": {"input": "absent.gpkg"}}', execute]),
    ]
    big = tmp_path / "big.json"
    big.write_text('{"inputs": {"title": "' + "x" * (2 << 20) + '"}}')
    cases.append(("oversize body", 413, ["-X", "POST", "--data-binary", f"@{big}", execute]))
    for name, status, args in cases:
        code, body = curl(*args)
        assert code == status, (name, code, body)
        ogc.exception(body, status)
    jobs = server.get("/jobs").json()["jobs"]
    assert jobs == [], "a refused request started a job"
