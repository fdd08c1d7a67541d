"""The service driven by a client nobody here wrote: OWSLib's OGC API – Processes client
(`owslib.ogcapi.processes.Processes`, PyPI), every answer checked against the shapes of the
standard's schemas (ogc_schemas.py names each schema file)."""

import json

import requests
from owslib.ogcapi.processes import Processes

import ogc_schemas as ogc
from conftest import RECORDS, cli
from helpers import key_results


def owslib(server):
    # OWSLib keeps its request headers in a module-wide dict: reset what execute() leaves.
    client = Processes(server.url + "/")
    client.headers.pop("Prefer", None)
    return client


def test_landing_conformance_and_api(shared_server):
    client = owslib(shared_server)
    ogc.landing_page(client.response)
    rels = {l["rel"] for l in client.links}
    assert {"service-desc", "http://www.opengis.net/def/rel/ogc/1.0/processes",
            "http://www.opengis.net/def/rel/ogc/1.0/conformance"} <= rels
    conformance = client.conformance()
    ogc.conf_classes(conformance)
    # Only classes implemented; all of OGC 18-062r2's prefix.
    assert set(conformance["conformsTo"]) == {ogc.CONF + c for c in (
        "core", "ogc-process-description", "json", "html", "oas30", "job-list", "dismiss")}
    api = client.api()  # OWSLib follows the service-desc link with the OpenAPI media type
    assert api["openapi"].startswith("3.0")
    for path in ("/processes/{processID}/execution", "/jobs/{jobID}", "/files/{name}"):
        assert path in api["paths"], path


def test_processes_and_a_description(shared_server):
    client = owslib(shared_server)
    listed = client.processes()
    ogc.process_list(shared_server.get("/processes").json())
    ids = [p["id"] for p in listed]
    for tool in ("synth", "density", "scan", "render"):
        assert tool in ids
    description = client.process("scan")
    ogc.process(description)
    assert set(description["jobControlOptions"]) == {"sync-execute", "async-execute", "dismiss"}
    assert description["inputs"]["replicates"]["schema"]["type"] == "integer"


def test_execute_synchronously_and_compare_with_the_cli(shared_server, sample, tmp_path):
    client = owslib(shared_server)
    inputs = {"input": "sample.gpkg", "layer": RECORDS, "replicates": 19, "seed": 5}
    results = client.execute("scan", inputs=inputs)  # Prefer: respond-sync
    ogc.results(results)
    summary = results["summary"]["value"]
    assert results["clusters"]["type"] == "application/geopackage+sqlite3"
    # The same run from the shell (same seed) gives the same key results.
    out = tmp_path / "cli.gpkg"
    cli_summary = json.loads(cli("scan", "--input", sample, "--layer", RECORDS, "--replicates",
                                 19, "--seed", 5, "--output", out).stdout)
    assert key_results(summary) == key_results(cli_summary)
    download = requests.get(results["clusters"]["href"], timeout=60)
    assert download.status_code == 200 and download.content[:16] == b"SQLite format 3\x00"


def test_execute_asynchronously_and_fetch_results(shared_server):
    client = owslib(shared_server)
    inputs = {"input": "sample.gpkg", "layer": RECORDS, "permutations": 0, "cell-m": 1000}
    status = client.execute("density", inputs=inputs, async_=True)
    client.headers.pop("Prefer", None)
    ogc.status_info(status)
    assert status["status"] in ("accepted", "running")
    location = client.response_headers["Location"]
    assert location.endswith("/jobs/" + status["jobID"])
    info = shared_server.wait(status["jobID"])
    ogc.status_info(info)
    assert (info["status"], info["progress"]) == ("successful", 100), info
    results = client._request(path=f"jobs/{status['jobID']}/results")  # OWSLib's own GET
    ogc.results(results)
    layers = [l["name"] for l in results["summary"]["value"]["layers"]]
    assert "density_support" in layers
    jobs = shared_server.get("/jobs").json()
    ogc.job_list(jobs)
    assert status["jobID"] in [j["jobID"] for j in jobs["jobs"]]
