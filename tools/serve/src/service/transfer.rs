//! Files in and out: uploads into the workspace's `files/` (`PUT /files/{name}`, size-limited,
//! written to a hidden file and renamed into place only when complete), listings, streamed
//! downloads, and drawing previews with the render tool.

use std::path::Path as FsPath;
use std::process::Stdio;
use std::sync::Arc;

use axum::body::{Body, Bytes};
use axum::extract::{Path, State};
use axum::http::{header, HeaderMap, StatusCode};
use axum::response::{IntoResponse, Response};
use futures_util::StreamExt;
use serde_json::json;
use tokio::io::{AsyncReadExt, AsyncWriteExt};

use super::paths::check_name;
use super::preview::Layer;
use super::routes::{bad_request, base, fail, reply, too_large};
use super::App;

/// `GET /files`: the workspace's files (hidden and partial uploads left out).
pub async fn list(State(app): State<Arc<App>>, headers: HeaderMap) -> Response {
    let base = base(&headers);
    let mut files = Vec::new();
    if let Ok(entries) = std::fs::read_dir(&app.workspace.files) {
        for entry in entries.flatten() {
            let name = entry.file_name().to_string_lossy().into_owned();
            if check_name(&name).is_err() {
                continue;
            }
            let Ok(meta) = std::fs::metadata(entry.path()) else {
                continue;
            };
            if meta.is_file() {
                files.push(json!({
                    "name": name,
                    "size": meta.len(),
                    "href": format!("{base}/files/{name}"),
                }));
            }
        }
    }
    files.sort_by(|a, b| a["name"].as_str().cmp(&b["name"].as_str()));
    reply(
        StatusCode::OK,
        &json!({ "files": files, "links": [
            {"href": format!("{base}/files"), "rel": "self", "type": "application/json"}
        ]}),
    )
}

/// `GET /files/{name}`.
pub async fn fetch(State(app): State<Arc<App>>, Path(name): Path<String>) -> Response {
    let absent = check_name(&name).is_ok()
        && std::fs::symlink_metadata(app.workspace.files.join(&name)).is_err();
    match app.workspace.existing_file(&name) {
        Ok(path) => send(&path, "application/octet-stream", Some(&name)).await,
        Err(detail) if absent => fail(
            StatusCode::NOT_FOUND,
            "urn:stance:no-such-file",
            "No such file",
            &detail,
        ),
        // Not a plain name, or it resolves outside the workspace.
        Err(detail) => bad_request(&detail),
    }
}

/// `PUT /files/{name}`: stores the body as `files/{name}` (201 new, 200 replaced).
pub async fn upload(
    State(app): State<Arc<App>>,
    Path(name): Path<String>,
    headers: HeaderMap,
    body: Body,
) -> Response {
    let target = match app.workspace.writable_file(&name) {
        Ok(t) => t,
        Err(detail) => return bad_request(&format!("file name: {detail}")),
    };
    let limit = app.max_upload;
    let declared = headers
        .get(header::CONTENT_LENGTH)
        .and_then(|v| v.to_str().ok())
        .and_then(|v| v.parse::<u64>().ok());
    if declared.is_some_and(|n| n > limit) {
        return too_large(limit);
    }
    let partial = app
        .workspace
        .files
        .join(format!(".upload-{name}-{}", std::process::id()));
    let written = match receive(body, &partial, limit).await {
        Ok(n) => n,
        Err(response) => {
            let _ = tokio::fs::remove_file(&partial).await;
            return *response;
        }
    };
    let existed = target.exists();
    if let Err(e) = tokio::fs::rename(&partial, &target).await {
        let _ = tokio::fs::remove_file(&partial).await;
        return fail(
            StatusCode::INTERNAL_SERVER_ERROR,
            "urn:stance:server-error",
            "Server error",
            &format!("cannot store '{name}' ({e})"),
        );
    }
    let status = if existed {
        StatusCode::OK
    } else {
        StatusCode::CREATED
    };
    let base = base(&headers);
    let mut response = reply(
        status,
        &json!({
            "name": name, "size": written, "href": format!("{base}/files/{name}")
        }),
    );
    if let Ok(v) = header::HeaderValue::from_str(&format!("{base}/files/{name}")) {
        response.headers_mut().insert(header::LOCATION, v);
    }
    response
}

async fn receive(body: Body, partial: &FsPath, limit: u64) -> Result<u64, Box<Response>> {
    let server = |e: std::io::Error| {
        Box::new(fail(
            StatusCode::INTERNAL_SERVER_ERROR,
            "urn:stance:server-error",
            "Server error",
            &format!("cannot write the upload ({e})"),
        ))
    };
    let mut file = tokio::fs::File::create(partial).await.map_err(server)?;
    let mut stream = body.into_data_stream();
    let mut written = 0u64;
    while let Some(chunk) = stream.next().await {
        let chunk =
            chunk.map_err(|e| Box::new(bad_request(&format!("the upload broke off ({e})"))))?;
        written += chunk.len() as u64;
        if written > limit {
            return Err(Box::new(too_large(limit)));
        }
        file.write_all(&chunk).await.map_err(server)?;
    }
    file.flush().await.map_err(server)?;
    file.sync_all().await.map_err(server)?;
    Ok(written)
}

/// Streams `path` as `media`, as an attachment called `name` when given.
pub async fn send(path: &FsPath, media: &str, name: Option<&str>) -> Response {
    let file = match tokio::fs::File::open(path).await {
        Ok(f) => f,
        Err(_) => {
            return fail(
                StatusCode::NOT_FOUND,
                "urn:stance:no-such-file",
                "No such file",
                "the file is gone",
            )
        }
    };
    let length = file.metadata().await.map(|m| m.len()).ok();
    let stream = futures_util::stream::unfold(file, |mut file| async move {
        let mut buffer = vec![0u8; 256 << 10];
        match file.read(&mut buffer).await {
            Ok(0) => None,
            Ok(n) => {
                buffer.truncate(n);
                Some((Ok::<Bytes, std::io::Error>(Bytes::from(buffer)), file))
            }
            Err(e) => Some((Err(e), file)),
        }
    });
    let mut response = Body::from_stream(stream).into_response();
    let headers = response.headers_mut();
    if let Ok(v) = header::HeaderValue::from_str(media) {
        headers.insert(header::CONTENT_TYPE, v);
    }
    if let Some(n) = length {
        headers.insert(header::CONTENT_LENGTH, n.into());
    }
    if let Some(name) = name {
        if let Ok(v) = header::HeaderValue::from_str(&format!("attachment; filename=\"{name}\"")) {
            headers.insert(header::CONTENT_DISPOSITION, v);
        }
    }
    response
}

/// Draws `layer` of `input` (a path relative to `dir`) with `stance render`, run in `dir`.
///
/// # Errors
/// The render tool's error line.
pub async fn render(app: &App, layer: &Layer, input: &FsPath, dir: &FsPath) -> Result<(), String> {
    let png = format!("preview-{}.png", layer.name);
    let scratch = format!(".preview-{}.gpkg", layer.name);
    let output = tokio::process::Command::new(&app.umbrella)
        .arg("render")
        .args(layer.render_args(input, &scratch, &png))
        .current_dir(dir)
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .output()
        .await
        .map_err(|e| format!("cannot start the render tool ({e})"))?;
    let _ = tokio::fs::remove_file(dir.join(&scratch)).await;
    if output.status.success() && dir.join(&png).is_file() {
        return Ok(());
    }
    let stderr = String::from_utf8_lossy(&output.stderr);
    Err(stderr
        .lines()
        .rev()
        .find(|l| !l.trim().is_empty())
        .unwrap_or("the render tool failed")
        .to_owned())
}
