"""Security of a file-handling service: names that leave the workspace (`../`, absolute paths,
a symlink out of it) are refused with 400, bodies over their limits with 413, a non-loopback
bind without a token is refused at start, and with a token every request needs it (401)."""

import os
import subprocess

import requests

import ogc_schemas as ogc
from conftest import SERVE, Server, workspace_with


def test_paths_out_of_the_workspace_are_refused(server, tmp_path, sample):
    outside = tmp_path / "outside.gpkg"
    outside.write_bytes(sample.read_bytes())
    os.symlink(outside, server.workspace / "files" / "escape.gpkg")
    attempts = [
        {"input": "../files/sample.gpkg"},
        {"input": "../../../etc/passwd"},
        {"input": str(outside)},
        {"input": "/etc/passwd"},
        {"input": "escape.gpkg"},
        {"input": "sample.gpkg", "output": "../evil.gpkg"},
        {"input": "sample.gpkg", "output": "/tmp/evil.gpkg"},
        {"input": "sample.gpkg", "output": "escape.gpkg"},
        {"input": "sample.gpkg", "layer": "../../x"},
    ]
    for inputs in attempts:
        r = server.post("/processes/density/execution", json={"inputs": inputs})
        assert r.status_code == 400, (inputs, r.status_code, r.text)
        ogc.exception(r.json(), 400)
    # Uploads and downloads by name: curl sends the dots as they are (--path-as-is).
    for name in ("..%2Fevil.gpkg", "..%2F..%2Fevil.gpkg", "%2Ftmp%2Fevil.gpkg", ".hidden"):
        out = subprocess.run(["curl", "-s", "--path-as-is", "-o", "/dev/null", "-w", "%{http_code}",
                              "-X", "PUT", "--data-binary", "x", f"{server.url}/files/{name}"],
                             capture_output=True, text=True, check=True).stdout
        assert out == "400", (name, out)
    assert server.get("/files/escape.gpkg").status_code == 400
    assert not (server.workspace / "evil.gpkg").exists()
    assert not (tmp_path / "evil.gpkg").exists()
    assert server.get("/jobs").json()["jobs"] == []


def test_uploads_and_bodies_have_limits(tmp_path, sample):
    server = Server(workspace_with(tmp_path, sample), "--max-upload-mb", "1")
    try:
        small = requests.put(server.url + "/files/small.gpkg", data=b"x" * 1000,
                                              timeout=60)
        assert small.status_code == 201, small.text
        big = requests.put(server.url + "/files/big.gpkg", data=b"x" * (2 << 20), timeout=60)
        assert big.status_code == 413
        ogc.exception(big.json(), 413)

        def chunks():  # no Content-Length: the limit holds while streaming too
            for _ in range(3):
                yield b"x" * (1 << 20)
        streamed = requests.put(server.url + "/files/streamed.gpkg", data=chunks(), timeout=60)
        assert streamed.status_code == 413
        names = [f["name"] for f in server.get("/files").json()["files"]]
        assert names == ["sample.gpkg", "small.gpkg"]
        assert not [p for p in (server.workspace / "files").iterdir() if p.name.startswith(".")]
        body = b'{"inputs": {"title": "' + b"x" * (2 << 20) + b'"}}'
        r = requests.post(server.url + "/processes/render/execution", data=body, timeout=60)
        assert r.status_code == 413
    finally:
        server.stop()


def test_a_non_loopback_bind_without_a_token_is_refused_at_start(tmp_path):
    ws = tmp_path / "never"
    r = subprocess.run([*SERVE, "--bind", "0.0.0.0:0", "--workspace", str(ws)],
                       capture_output=True, text=True, timeout=60)
    assert r.returncode == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and "--token" in lines[0], r.stderr
    assert not ws.exists()


def test_requests_without_the_token_get_401(tmp_path, sample):
    server = Server(workspace_with(tmp_path, sample), token="correct-horse")
    try:
        for headers in ({}, {"Authorization": "Bearer wrong"}, {"Authorization": "correct-horse"}):
            r = requests.get(server.url + "/processes", headers=headers, timeout=30)
            assert r.status_code == 401, headers
            ogc.exception(r.json(), 401)
            assert r.headers["WWW-Authenticate"] == "Bearer"
        r = requests.post(server.url + "/processes/scan/execution", json={"inputs": {}}, timeout=30)
        assert r.status_code == 401
        assert server.get("/processes").status_code == 200
        # The page's own files hold no data and load without it (the page then asks for it).
        assert requests.get(server.url + "/page", timeout=30).status_code == 200
    finally:
        server.stop()
