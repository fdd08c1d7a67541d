//! The JSON documents of OGC API – Processes – Part 1: Core 1.0 (OGC 18-062r2), in the shapes
//! of the standard's schemas (repository opengeospatial/ogcapi-processes, folder
//! `core/openapi/schemas`): `landingPage.yaml`, `confClasses.yaml`, `processList.yaml`,
//! `process.yaml`, `statusInfo.yaml`, `jobList.yaml`, `results.yaml` and `exception.yaml`.

use serde_json::{json, Map, Value};

use super::store::Job;

/// The conformance classes this service implements (OGC 18-062r2, annex A).
pub const CONFORMANCE: &[&str] = &[
    "http://www.opengis.net/spec/ogcapi-processes-1/1.0/conf/core",
    "http://www.opengis.net/spec/ogcapi-processes-1/1.0/conf/ogc-process-description",
    "http://www.opengis.net/spec/ogcapi-processes-1/1.0/conf/json",
    "http://www.opengis.net/spec/ogcapi-processes-1/1.0/conf/html",
    "http://www.opengis.net/spec/ogcapi-processes-1/1.0/conf/oas30",
    "http://www.opengis.net/spec/ogcapi-processes-1/1.0/conf/job-list",
    "http://www.opengis.net/spec/ogcapi-processes-1/1.0/conf/dismiss",
];

/// Link relations of OGC API – Processes.
const REL: &str = "http://www.opengis.net/def/rel/ogc/1.0/";
/// Exception types of OGC API – Processes.
pub const EXCEPTION: &str = "http://www.opengis.net/def/exceptions/ogcapi-processes-1/1.0/";
/// The media type of a GeoPackage (OGC 12-128r18).
pub const GEOPACKAGE: &str = "application/geopackage+sqlite3";
/// The media type of the OpenAPI document.
pub const OPENAPI: &str = "application/vnd.oai.openapi+json;version=3.0";

fn link(href: String, rel: &str, media: &str, title: &str) -> Value {
    json!({"href": href, "rel": rel, "type": media, "title": title})
}

/// `landingPage.yaml`: title, description and links (`links` required).
pub fn landing(base: &str) -> Value {
    json!({
        "title": "stance-toolbox",
        "description": "The stance-toolbox tools as OGC API – Processes: map stance toward a \
            topic from geolocated records, from GeoPackage to GeoPackage.",
        "links": [
            link(format!("{base}/"), "self", "application/json", "This document"),
            link(format!("{base}/?f=html"), "alternate", "text/html", "This service as a page"),
            link(format!("{base}/api"), "service-desc", OPENAPI, "The API definition"),
            link(format!("{base}/page"), "service-doc", "text/html", "The service's page"),
            link(format!("{base}/conformance"), &format!("{REL}conformance"), "application/json",
                "Conformance classes implemented"),
            link(format!("{base}/processes"), &format!("{REL}processes"), "application/json",
                "The processes"),
            link(format!("{base}/jobs"), &format!("{REL}job-list"), "application/json", "The jobs"),
            link(format!("{base}/files"), "data", "application/json",
                "Files of the workspace (upload with PUT /files/NAME)"),
        ]
    })
}

/// `confClasses.yaml`: `conformsTo` (required).
pub fn conformance() -> Value {
    json!({ "conformsTo": CONFORMANCE })
}

/// What the service adds to a tool's description: it runs every process synchronously and
/// asynchronously and can dismiss jobs (`jobControlOptions.yaml`).
fn served(description: &Value, base: &str) -> Value {
    let mut d = description.clone();
    let id = d["id"].as_str().unwrap_or_default().to_owned();
    if let Some(o) = d.as_object_mut() {
        o.insert(
            "jobControlOptions".into(),
            json!(["sync-execute", "async-execute", "dismiss"]),
        );
        o.insert("outputTransmission".into(), json!(["value", "reference"]));
        o.insert(
            "links".into(),
            json!([
                link(
                    format!("{base}/processes/{id}"),
                    "self",
                    "application/json",
                    "This process"
                ),
                link(
                    format!("{base}/processes/{id}/execution"),
                    &format!("{REL}execute"),
                    "application/json",
                    "Execute this process"
                ),
            ]),
        );
    }
    d
}

/// `processSummary.yaml`: the description without inputs and outputs.
pub fn summary(description: &Value, base: &str) -> Value {
    let mut d = served(description, base);
    if let Some(o) = d.as_object_mut() {
        o.remove("inputs");
        o.remove("outputs");
    }
    d
}

/// `process.yaml`.
pub fn process(description: &Value, base: &str) -> Value {
    served(description, base)
}

/// `processList.yaml`: `processes` and `links` (both required).
pub fn process_list<'a>(descriptions: impl Iterator<Item = &'a Value>, base: &str) -> Value {
    let processes: Vec<Value> = descriptions.map(|d| summary(d, base)).collect();
    json!({
        "processes": processes,
        "links": [link(format!("{base}/processes"), "self", "application/json", "The processes")],
    })
}

/// `statusInfo.yaml`: `jobID`, `status` and `type` required; `progress` an integer 0–100.
pub fn status_info(job: &Job, base: &str) -> Value {
    let id = &job.id;
    let mut links = vec![link(
        format!("{base}/jobs/{id}"),
        "self",
        "application/json",
        "This job",
    )];
    if job.status == "successful" {
        links.push(link(
            format!("{base}/jobs/{id}/results"),
            &format!("{REL}results"),
            "application/json",
            "The job's results",
        ));
        if job.output.is_some() {
            links.push(link(
                format!("{base}/jobs/{id}/download"),
                "enclosure",
                GEOPACKAGE,
                "The output GeoPackage",
            ));
        }
        for preview in job.previews.iter().flat_map(|p| p.as_array()).flatten() {
            if let Some(layer) = preview["layer"].as_str() {
                links.push(link(
                    format!("{base}/jobs/{id}/preview/{layer}.png"),
                    "preview",
                    "image/png",
                    layer,
                ));
            }
        }
    }
    let mut info = Map::new();
    info.insert("type".into(), json!("process"));
    info.insert("jobID".into(), json!(id));
    info.insert("processID".into(), json!(job.process_id));
    info.insert("status".into(), json!(job.status));
    info.insert("message".into(), json!(job.message));
    info.insert("progress".into(), json!(job.progress));
    info.insert("created".into(), json!(job.created));
    for (key, value) in [("started", &job.started), ("finished", &job.finished)] {
        if let Some(v) = value {
            info.insert(key.into(), json!(v));
        }
    }
    info.insert("updated".into(), json!(job.updated));
    info.insert("links".into(), Value::Array(links));
    Value::Object(info)
}

/// `jobList.yaml`: `jobs` and `links` (both required).
pub fn job_list(jobs: &[Job], base: &str) -> Value {
    json!({
        "jobs": jobs.iter().map(|j| status_info(j, base)).collect::<Vec<_>>(),
        "links": [link(format!("{base}/jobs"), "self", "application/json", "The jobs")],
    })
}

/// `results.yaml`: one entry per declared output (`inlineOrRefData.yaml`). Every layer output
/// is in the one output GeoPackage, given by reference (`link.yaml`); the summary is given
/// inline as a qualified value (`qualifiedInputValue.yaml`: `value` plus `mediaType`).
pub fn results(job: &Job, description: &Value, base: &str) -> Value {
    let mut out = Map::new();
    let declared = description["outputs"]
        .as_object()
        .cloned()
        .unwrap_or_default();
    for (name, output) in declared {
        if name == "summary" {
            continue;
        }
        let media = output["schema"]["contentMediaType"]
            .as_str()
            .unwrap_or(GEOPACKAGE);
        if job.output.is_some() && media == GEOPACKAGE {
            out.insert(
                name.clone(),
                json!({
                    "href": format!("{base}/jobs/{}/download", job.id),
                    "rel": "enclosure",
                    "type": GEOPACKAGE,
                    "title": format!("{name}: the output GeoPackage"),
                }),
            );
        }
    }
    out.insert(
        "summary".into(),
        json!({
            "value": job.summary.clone().unwrap_or(Value::Null),
            "mediaType": "application/json",
        }),
    );
    Value::Object(out)
}

/// `exception.yaml` (RFC 7807): `type` required; `title`, `status`, `detail`.
pub fn exception(status: u16, kind: &str, title: &str, detail: &str) -> Value {
    let kind = if kind.contains(':') {
        kind.to_owned()
    } else {
        format!("{EXCEPTION}{kind}")
    };
    json!({ "type": kind, "title": title, "status": status, "detail": detail })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn job(status: &str) -> Job {
        Job {
            id: "j1".into(),
            process_id: "density".into(),
            status: status.into(),
            message: "done".into(),
            progress: 100,
            created: "2026-01-01T00:00:00.000Z".into(),
            started: Some("2026-01-01T00:00:01.000Z".into()),
            finished: None,
            updated: "2026-01-01T00:00:02.000Z".into(),
            request: json!({}),
            arguments: json!([]),
            output: Some("jobs/j1/output.gpkg".into()),
            summary: Some(json!({"results": {"n": 1}})),
            exit_code: Some(0),
            previews: Some(json!([{"layer": "s", "kind": "surface"}])),
        }
    }

    /// statusInfo.yaml: required jobID, status, type (enum: process); progress integer 0–100;
    /// links items need href (link.yaml).
    #[test]
    fn status_info_has_the_required_members() {
        let info = status_info(&job("successful"), "http://h");
        assert_eq!(info["type"], "process");
        assert_eq!(info["jobID"], "j1");
        assert_eq!(info["status"], "successful");
        assert!(info["progress"].is_u64());
        assert!(info.get("finished").is_none(), "absent when unknown");
        let links = info["links"].as_array().expect("links");
        assert!(links.iter().all(|l| l["href"].is_string()));
        let rels: Vec<&str> = links.iter().filter_map(|l| l["rel"].as_str()).collect();
        assert_eq!(
            rels,
            [
                "self",
                "http://www.opengis.net/def/rel/ogc/1.0/results",
                "enclosure",
                "preview"
            ]
        );
        let running = status_info(&job("running"), "http://h");
        assert_eq!(running["links"].as_array().map(Vec::len), Some(1));
    }

    /// results.yaml: each value is inlineOrRefData: a link (href) or a qualified value (value).
    #[test]
    fn results_give_the_geopackage_by_reference_and_the_summary_inline() {
        let description = json!({"outputs": {
            "surfaces": {"schema": {"type": "string", "contentMediaType": GEOPACKAGE}},
            "summary": {"schema": {"type": "object", "contentMediaType": "application/json"}}
        }});
        let r = results(&job("successful"), &description, "http://h");
        assert_eq!(r["surfaces"]["href"], "http://h/jobs/j1/download");
        assert_eq!(r["summary"]["value"]["results"]["n"], 1);
        assert!(r["summary"].get("href").is_none());
    }

    #[test]
    fn an_exception_names_its_type_and_status() {
        let e = exception(404, "no-such-process", "Unknown process", "no process 'x'");
        assert_eq!(
            e["type"],
            "http://www.opengis.net/def/exceptions/ogcapi-processes-1/1.0/no-such-process"
        );
        assert_eq!(e["status"], 404);
        let e = exception(400, "urn:stance:bad-input", "Bad input", "d");
        assert_eq!(e["type"], "urn:stance:bad-input");
    }
}
