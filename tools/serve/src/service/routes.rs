//! The HTTP routes: OGC API – Processes – Part 1: Core 1.0, plus the workspace's files
//! (`/files`), downloads and preview maps of job outputs, and the browser page.

use std::sync::Arc;

use axum::body::Body;
use axum::extract::{Path, RawQuery, Request, State};
use axum::http::{header, HeaderMap, HeaderValue, StatusCode};
use axum::middleware::{self, Next};
use axum::response::{IntoResponse, Response};
use axum::routing::get;
use axum::Router;
use serde_json::{json, Value};

use super::documents::{self, exception};
use super::store::Job;
use super::{inputs, runner, transfer, App, MAX_BODY};

const PAGE: &str = include_str!("../../static/page.html");
const PAGE_JS: &str = include_str!("../../static/page.js");
const PAGE_CSS: &str = include_str!("../../static/page.css");
const OPENAPI: &str = include_str!("../../static/openapi.json");

type Shared = State<Arc<App>>;

/// Every route, behind the token check.
pub fn router(app: Arc<App>) -> Router {
    Router::new()
        .route("/", get(landing))
        .route("/page", get(page))
        .route(
            "/page.js",
            get(|| async { text("text/javascript", PAGE_JS) }),
        )
        .route("/page.css", get(|| async { text("text/css", PAGE_CSS) }))
        .route(
            "/conformance",
            get(|| async { ok(documents::conformance()) }),
        )
        .route("/api", get(api))
        .route("/processes", get(processes))
        .route("/processes/{id}", get(process))
        .route("/processes/{id}/execution", axum::routing::post(execute))
        .route("/jobs", get(jobs))
        .route("/jobs/{id}", get(job).delete(dismiss))
        .route("/jobs/{id}/results", get(results))
        .route("/jobs/{id}/download", get(download))
        .route("/jobs/{id}/preview/{file}", get(preview))
        .route("/files", get(transfer::list))
        .route("/files/{name}", get(transfer::fetch).put(transfer::upload))
        .fallback(|| async {
            fail(
                StatusCode::NOT_FOUND,
                "urn:stance:not-found",
                "Not found",
                "no such resource; see /api",
            )
        })
        .method_not_allowed_fallback(|| async {
            fail(
                StatusCode::METHOD_NOT_ALLOWED,
                "urn:stance:method-not-allowed",
                "Method not allowed",
                "this resource does not take that method; see /api",
            )
        })
        .layer(axum::extract::DefaultBodyLimit::disable())
        .layer(middleware::from_fn_with_state(Arc::clone(&app), auth))
        .with_state(app)
}

/// A JSON answer.
pub fn reply(status: StatusCode, value: &Value) -> Response {
    let body = serde_json::to_string_pretty(value).unwrap_or_default();
    (status, [(header::CONTENT_TYPE, "application/json")], body).into_response()
}

fn ok(value: Value) -> Response {
    reply(StatusCode::OK, &value)
}

fn text(media: &'static str, body: &'static str) -> Response {
    ([(header::CONTENT_TYPE, media)], body).into_response()
}

/// An OGC exception (`exception.yaml`) with `status`.
pub fn fail(status: StatusCode, kind: &str, title: &str, detail: &str) -> Response {
    reply(status, &exception(status.as_u16(), kind, title, detail))
}

/// 400 for a request the service refuses before running anything.
pub fn bad_request(detail: &str) -> Response {
    fail(
        StatusCode::BAD_REQUEST,
        "urn:stance:invalid-request",
        "Invalid request",
        detail,
    )
}

/// 413 for a body over its limit.
pub fn too_large(limit: u64) -> Response {
    fail(
        StatusCode::PAYLOAD_TOO_LARGE,
        "urn:stance:payload-too-large",
        "Request body too large",
        &format!("the body exceeds the limit of {limit} bytes"),
    )
}

fn internal(detail: &str) -> Response {
    fail(
        StatusCode::INTERNAL_SERVER_ERROR,
        "urn:stance:server-error",
        "Server error",
        detail,
    )
}

fn no_such_job(id: &str) -> Response {
    fail(
        StatusCode::NOT_FOUND,
        "no-such-job",
        "No such job",
        &format!("no job '{id}'"),
    )
}

/// `http://host:port` from the request's Host header (characters of a host and port only).
pub fn base(headers: &HeaderMap) -> String {
    let host = headers
        .get(header::HOST)
        .and_then(|h| h.to_str().ok())
        .filter(|h| {
            !h.is_empty()
                && h.chars()
                    .all(|c| c.is_ascii_alphanumeric() || matches!(c, '.' | ':' | '-' | '[' | ']'))
        })
        .unwrap_or("localhost");
    format!("http://{host}")
}

/// With `--token`, every request but the page's own files needs `Authorization: Bearer TOKEN`.
async fn auth(State(app): Shared, request: Request, next: Next) -> Response {
    let path = request.uri().path();
    let public = matches!(path, "/page" | "/page.js" | "/page.css");
    if let (Some(token), false) = (&app.token, public) {
        let given = request
            .headers()
            .get(header::AUTHORIZATION)
            .and_then(|v| v.to_str().ok())
            .and_then(|v| v.strip_prefix("Bearer "))
            .map(str::trim);
        if !given.is_some_and(|g| same(g.as_bytes(), token.as_bytes())) {
            let mut response = fail(
                StatusCode::UNAUTHORIZED,
                "urn:stance:unauthorized",
                "Unauthorized",
                "this service needs 'Authorization: Bearer TOKEN' (see stance serve --token)",
            );
            response
                .headers_mut()
                .insert(header::WWW_AUTHENTICATE, HeaderValue::from_static("Bearer"));
            return response;
        }
    }
    next.run(request).await
}

/// Compares in time independent of where the first difference is.
fn same(a: &[u8], b: &[u8]) -> bool {
    a.len() == b.len() && a.iter().zip(b).fold(0u8, |acc, (x, y)| acc | (x ^ y)) == 0
}

fn wants_html(headers: &HeaderMap, query: Option<&str>) -> bool {
    match query
        .unwrap_or_default()
        .split('&')
        .find_map(|p| p.strip_prefix("f="))
    {
        Some(f) => f == "html",
        None => headers
            .get(header::ACCEPT)
            .and_then(|a| a.to_str().ok())
            .is_some_and(|a| a.contains("text/html")),
    }
}

async fn landing(headers: HeaderMap, RawQuery(query): RawQuery) -> Response {
    if wants_html(&headers, query.as_deref()) {
        return page().await;
    }
    ok(documents::landing(&base(&headers)))
}

async fn page() -> Response {
    text("text/html; charset=utf-8", PAGE)
}

async fn api() -> Response {
    ([(header::CONTENT_TYPE, documents::OPENAPI)], OPENAPI).into_response()
}

async fn processes(State(app): Shared, headers: HeaderMap) -> Response {
    let descriptions = app.processes.iter().filter_map(|p| p.description());
    ok(documents::process_list(descriptions, &base(&headers)))
}

fn no_such_process(app: &App, id: &str) -> Response {
    let ids: Vec<&str> = app.processes.iter().map(|p| p.id.as_str()).collect();
    fail(
        StatusCode::NOT_FOUND,
        "no-such-process",
        "No such process",
        &format!("no process '{id}'; this service offers {}", ids.join(", ")),
    )
}

async fn process(State(app): Shared, Path(id): Path<String>, headers: HeaderMap) -> Response {
    match app.process(&id) {
        Some((_, description)) => ok(documents::process(description, &base(&headers))),
        None => no_such_process(&app, &id),
    }
}

/// A new job id: 128 bits from the clock, a counter and the process id, hashed.
fn new_id() -> String {
    use sha2::{Digest, Sha256};
    use std::sync::atomic::{AtomicU64, Ordering};
    static COUNTER: AtomicU64 = AtomicU64::new(0);
    let nanos = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map(|d| d.as_nanos())
        .unwrap_or_default();
    let n = COUNTER.fetch_add(1, Ordering::Relaxed);
    let digest = Sha256::digest(format!("{nanos}/{n}/{}", std::process::id()));
    digest[..16].iter().map(|b| format!("{b:02x}")).collect()
}

/// `POST /processes/{id}/execution`: synchronous unless `Prefer: respond-async`.
async fn execute(
    State(app): Shared,
    Path(id): Path<String>,
    headers: HeaderMap,
    body: Body,
) -> Response {
    let Some((process, description)) = app.process(&id) else {
        return no_such_process(&app, &id);
    };
    let declared = headers
        .get(header::CONTENT_LENGTH)
        .and_then(|v| v.to_str().ok())
        .and_then(|v| v.parse::<u64>().ok());
    if declared.is_some_and(|n| n > MAX_BODY as u64) {
        return too_large(MAX_BODY as u64);
    }
    let Ok(bytes) = axum::body::to_bytes(body, MAX_BODY).await else {
        return too_large(MAX_BODY as u64);
    };
    let request: Value = match serde_json::from_slice(&bytes) {
        Ok(v) => v,
        Err(e) => return bad_request(&format!("the body is not valid JSON ({e})")),
    };
    let job_id = new_id();
    let dir = app.workspace.job_dir(&job_id);
    let plan = match inputs::plan(description, &request, &app.workspace, &dir) {
        Ok(p) => p,
        Err(detail) => return bad_request(&detail),
    };
    if let Err(e) = std::fs::create_dir_all(&dir) {
        return internal(&format!("cannot create the job's folder ({e})"));
    }
    let (program, mut args) = process.command(&app.umbrella);
    args.extend(plan.args);
    let arguments: Vec<String> = args
        .iter()
        .map(|a| a.to_string_lossy().into_owned())
        .collect();
    let output = plan.output.as_ref().map(|o| {
        o.strip_prefix(&app.workspace.root)
            .unwrap_or(o)
            .display()
            .to_string()
    });
    if let Err(e) =
        app.store(|s| s.insert(&job_id, &id, &request, &json!(arguments), output.as_deref()))
    {
        return internal(&e);
    }
    let launch = runner::Launch {
        id: job_id.clone(),
        program,
        args,
        dir,
        output: plan.output,
    };
    let handle = tokio::spawn(runner::run(Arc::clone(&app), launch));
    let base = base(&headers);
    let asynchronous = headers
        .get_all("prefer")
        .iter()
        .filter_map(|v| v.to_str().ok())
        .any(|v| v.contains("respond-async"));
    if asynchronous {
        return created(&app, &job_id, &base);
    }
    let _ = handle.await;
    match app.store(|s| s.get(&job_id)) {
        Ok(Some(job)) if job.status == "successful" => {
            let mut response = ok(documents::results(&job, description, &base));
            add_location(&mut response, &base, &job_id);
            response
        }
        Ok(Some(job)) => job_failed(&job, &base),
        Ok(None) => no_such_job(&job_id),
        Err(e) => internal(&e),
    }
}

fn add_location(response: &mut Response, base: &str, id: &str) {
    if let Ok(value) = HeaderValue::from_str(&format!("{base}/jobs/{id}")) {
        response.headers_mut().insert(header::LOCATION, value);
    }
}

/// 201 with the job's status and its Location (an asynchronous execution).
fn created(app: &App, id: &str, base: &str) -> Response {
    match app.store(|s| s.get(id)) {
        Ok(Some(job)) => {
            let mut response = reply(StatusCode::CREATED, &documents::status_info(&job, base));
            add_location(&mut response, base, id);
            response
        }
        Ok(None) => no_such_job(id),
        Err(e) => internal(&e),
    }
}

/// A failed synchronous job: 400 when the tool refused its input (exit code 2), else 500.
fn job_failed(job: &Job, base: &str) -> Response {
    let status = if job.exit_code == Some(2) {
        StatusCode::BAD_REQUEST
    } else {
        StatusCode::INTERNAL_SERVER_ERROR
    };
    let mut value = exception(
        status.as_u16(),
        "urn:stance:job-failed",
        "The job failed",
        &job.message,
    );
    value["instance"] = json!(format!("{base}/jobs/{}", job.id));
    reply(status, &value)
}

async fn jobs(State(app): Shared, headers: HeaderMap, RawQuery(query): RawQuery) -> Response {
    let process = query
        .as_deref()
        .unwrap_or_default()
        .split('&')
        .find_map(|p| p.strip_prefix("processID="))
        .map(str::to_owned);
    match app.store(|s| s.list(process.as_deref())) {
        Ok(list) => ok(documents::job_list(&list, &base(&headers))),
        Err(e) => internal(&e),
    }
}

fn find(app: &App, id: &str) -> Result<Job, Box<Response>> {
    match app.store(|s| s.get(id)) {
        Ok(Some(job)) => Ok(job),
        Ok(None) => Err(Box::new(no_such_job(id))),
        Err(e) => Err(Box::new(internal(&e))),
    }
}

async fn job(State(app): Shared, Path(id): Path<String>, headers: HeaderMap) -> Response {
    match find(&app, &id) {
        Ok(job) => ok(documents::status_info(&job, &base(&headers))),
        Err(response) => *response,
    }
}

/// `DELETE /jobs/{id}`: a queued job never starts; a running tool gets SIGTERM and rolls back;
/// the job folder (output, logs, previews) is removed. Files in `files/` are never removed.
async fn dismiss(State(app): Shared, Path(id): Path<String>, headers: HeaderMap) -> Response {
    let before = match app.store(|s| s.dismiss(&id)) {
        Ok(Some(before)) => before,
        Ok(None) => return no_such_job(&id),
        Err(e) => return internal(&e),
    };
    let signal = app.running.lock().ok().and_then(|r| r.get(&id).cloned());
    match signal {
        // The runner removes the folder once the tool has stopped.
        Some(cancel) => cancel.notify_one(),
        None if before != "running" => runner::remove_job_files(&app.workspace.job_dir(&id)),
        None => {}
    }
    match find(&app, &id) {
        Ok(job) => ok(documents::status_info(&job, &base(&headers))),
        Err(response) => *response,
    }
}

async fn results(State(app): Shared, Path(id): Path<String>, headers: HeaderMap) -> Response {
    let job = match find(&app, &id) {
        Ok(job) => job,
        Err(response) => return *response,
    };
    let base = base(&headers);
    match job.status.as_str() {
        "successful" => {
            let description = app
                .process(&job.process_id)
                .map(|(_, d)| d.clone())
                .unwrap_or(Value::Null);
            ok(documents::results(&job, &description, &base))
        }
        "failed" => job_failed(&job, &base),
        "dismissed" => fail(
            StatusCode::GONE,
            "urn:stance:dismissed",
            "Job dismissed",
            &format!("job '{id}' was dismissed; its results are gone"),
        ),
        _ => fail(
            StatusCode::NOT_FOUND,
            "result-not-ready",
            "Result not ready",
            &format!("job '{id}' is {} ({}%)", job.status, job.progress),
        ),
    }
}

/// The output GeoPackage of a successful job.
async fn download(State(app): Shared, Path(id): Path<String>) -> Response {
    let job = match find(&app, &id) {
        Ok(job) => job,
        Err(response) => return *response,
    };
    match (&job.status[..], &job.output) {
        ("successful", Some(output)) => {
            let name = format!("{}-{}.gpkg", job.process_id, job.id);
            transfer::send(
                &app.workspace.root.join(output),
                documents::GEOPACKAGE,
                Some(&name),
            )
            .await
        }
        _ => fail(
            StatusCode::NOT_FOUND,
            "result-not-ready",
            "No output",
            &format!(
                "job '{id}' has no output to download (status {})",
                job.status
            ),
        ),
    }
}

/// `GET /jobs/{id}/preview/{layer}.png`: the layer drawn by the built-in render tool (kept in
/// the job folder after the first request).
async fn preview(State(app): Shared, Path((id, file)): Path<(String, String)>) -> Response {
    let job = match find(&app, &id) {
        Ok(job) => job,
        Err(response) => return *response,
    };
    let layer = file.strip_suffix(".png").unwrap_or_default();
    let known = job
        .previews
        .iter()
        .flat_map(|p| p.as_array())
        .flatten()
        .filter_map(super::preview::Layer::from_json)
        .find(|l| l.name == layer);
    let (Some(layer), Some(output), "successful") = (known, &job.output, job.status.as_str())
    else {
        return fail(
            StatusCode::NOT_FOUND,
            "urn:stance:no-preview",
            "No preview",
            &format!("job '{id}' has no surface or area layer '{layer}' to preview"),
        );
    };
    if !super::preview::valid_layer_name(&layer.name) {
        return bad_request(&format!("layer name '{}' cannot be previewed", layer.name));
    }
    let dir = app.workspace.job_dir(&id);
    let png = dir.join(format!("preview-{}.png", layer.name));
    if !png.is_file() {
        let _one_at_a_time = app.previews.lock().await;
        if !png.is_file() {
            let input = super::paths::relative_to(&app.workspace.root.join(output), &dir);
            if let Err(e) = transfer::render(&app, &layer, &input, &dir).await {
                return internal(&format!("cannot draw layer '{}': {e}", layer.name));
            }
        }
    }
    transfer::send(&png, "image/png", None).await
}
