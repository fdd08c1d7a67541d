"""The shapes OGC API – Processes – Part 1: Core 1.0 (OGC 18-062r2) requires of each answer,
written out from the standard's OpenAPI schemas (repository opengeospatial/ogcapi-processes,
folder core/openapi/schemas); each function names its schema file. They check required members,
types and enumerations: what a client may rely on.
"""

STATUS_CODES = {"accepted", "running", "successful", "failed", "dismissed"}  # statusCode.yaml
CONF = "http://www.opengis.net/spec/ogcapi-processes-1/1.0/conf/"


def _type(value, kind, where):
    types = {"string": str, "object": dict, "array": list, "integer": int, "boolean": bool}
    ok = isinstance(value, types[kind]) and not (kind == "integer" and isinstance(value, bool))
    assert ok, f"{where}: expected {kind}, got {value!r}"


def link(value, where="link"):
    """link.yaml: object, href required; rel, type, hreflang, title strings."""
    _type(value, "object", where)
    _type(value.get("href"), "string", f"{where}.href")
    for key in ("rel", "type", "hreflang", "title"):
        if key in value:
            _type(value[key], "string", f"{where}.{key}")


def links(value, where):
    _type(value, "array", where)
    for i, item in enumerate(value):
        link(item, f"{where}[{i}]")


def landing_page(doc):
    """landingPage.yaml: links required (array of link.yaml)."""
    links(doc["links"], "landingPage.links")
    for key in ("title", "description"):
        if key in doc:
            _type(doc[key], "string", f"landingPage.{key}")


def conf_classes(doc):
    """confClasses.yaml: conformsTo required, an array of strings."""
    _type(doc["conformsTo"], "array", "confClasses.conformsTo")
    for c in doc["conformsTo"]:
        _type(c, "string", "confClasses.conformsTo[]")


def process_summary(doc, where="processSummary"):
    """processSummary.yaml: id and version required strings; jobControlOptions items of
    jobControlOptions.yaml; outputTransmission items of transmissionMode.yaml; links."""
    _type(doc["id"], "string", f"{where}.id")
    _type(doc["version"], "string", f"{where}.version")
    for option in doc.get("jobControlOptions", []):
        assert option in {"sync-execute", "async-execute", "dismiss"}, f"{where}: {option}"
    for mode in doc.get("outputTransmission", []):
        assert mode in {"value", "reference"}, f"{where}: {mode}"
    if "links" in doc:
        links(doc["links"], f"{where}.links")


def process_list(doc):
    """processList.yaml: processes (processSummary.yaml items) and links required."""
    _type(doc["processes"], "array", "processList.processes")
    for p in doc["processes"]:
        process_summary(p, f"processList.processes[{p.get('id')}]")
    links(doc["links"], "processList.links")


def process(doc):
    """process.yaml: processSummary.yaml plus inputs (inputDescription.yaml: schema required,
    minOccurs integer, maxOccurs integer or "unbounded") and outputs (outputDescription.yaml:
    schema required)."""
    process_summary(doc, "process")
    for name, inp in doc.get("inputs", {}).items():
        _type(inp["schema"], "object", f"process.inputs.{name}.schema")
        if "minOccurs" in inp:
            _type(inp["minOccurs"], "integer", f"process.inputs.{name}.minOccurs")
        if "maxOccurs" in inp:
            assert inp["maxOccurs"] == "unbounded" or isinstance(inp["maxOccurs"], int)
    for name, out in doc.get("outputs", {}).items():
        _type(out["schema"], "object", f"process.outputs.{name}.schema")


def status_info(doc):
    """statusInfo.yaml: jobID, status (statusCode.yaml) and type (enum: process) required;
    progress an integer 0–100; message, processID strings; links."""
    _type(doc["jobID"], "string", "statusInfo.jobID")
    assert doc["status"] in STATUS_CODES, doc["status"]
    assert doc["type"] == "process", doc["type"]
    if "progress" in doc:
        _type(doc["progress"], "integer", "statusInfo.progress")
        assert 0 <= doc["progress"] <= 100, doc["progress"]
    for key in ("processID", "message", "created", "started", "finished", "updated"):
        if key in doc:
            _type(doc[key], "string", f"statusInfo.{key}")
    if "links" in doc:
        links(doc["links"], "statusInfo.links")


def job_list(doc):
    """jobList.yaml: jobs (statusInfo.yaml items) and links required."""
    _type(doc["jobs"], "array", "jobList.jobs")
    for job in doc["jobs"]:
        status_info(job)
    links(doc["links"], "jobList.links")


def results(doc):
    """results.yaml: an object whose values are inlineOrRefData.yaml: a plain value
    (inputValueNoObject.yaml), a qualified value (qualifiedInputValue.yaml: value required), or a
    link (link.yaml: href required)."""
    _type(doc, "object", "results")
    for name, value in doc.items():
        if isinstance(value, dict):
            assert ("value" in value) != ("href" in value), f"results.{name}: {value}"
            if "href" in value:
                link(value, f"results.{name}")
        else:
            assert isinstance(value, (str, int, float, bool, list)), f"results.{name}"


def exception(doc, status=None):
    """exception.yaml (RFC 7807): type required string; title, detail strings; status integer."""
    _type(doc["type"], "string", "exception.type")
    for key in ("title", "detail"):
        assert key in doc, f"exception.{key} (we always give it)"
        _type(doc[key], "string", f"exception.{key}")
    _type(doc["status"], "integer", "exception.status")
    if status is not None:
        assert doc["status"] == status, doc
