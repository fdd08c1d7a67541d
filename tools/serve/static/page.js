// The service's page: lists the processes, builds a form from each description's JSON Schema,
// runs jobs asynchronously, follows their progress and shows the summary, a download link and
// preview maps. Plain JavaScript, no library, nothing fetched from the internet.
"use strict";

const RESERVED = ["quiet", "verbose", "describe"];
const UNITS = { m: "metres", mb: "MiB", px: "pixels", s: "seconds" };
let token = sessionStorage.getItem("stance-token") || "";
let current = null;
let polling = null;

function $(id) { return document.getElementById(id); }

// fetch with the bearer token when the service asks for one (401).
async function api(path, options = {}, retry = true) {
  const headers = Object.assign({}, options.headers || {});
  if (token) headers["Authorization"] = "Bearer " + token;
  const response = await fetch(path, Object.assign({}, options, { headers }));
  if (response.status === 401 && retry) {
    const given = window.prompt("This service needs its access token:");
    if (given) {
      token = given.trim();
      sessionStorage.setItem("stance-token", token);
      return api(path, options, false);
    }
  }
  return response;
}

function isFileInput(name) { return name === "input" || name.endsWith("-file"); }

function unitOf(name) {
  const suffix = name.split("-").pop();
  return name.includes("-") && UNITS[suffix] ? UNITS[suffix] : "";
}

function allowedValues(schema) {
  if (Array.isArray(schema.enum)) return schema.enum;
  if (Array.isArray(schema.oneOf) && schema.oneOf.every(o => "const" in o)) return schema.oneOf.map(o => o.const);
  return null;
}

async function loadProcesses() {
  const response = await api("/processes");
  const list = await response.json();
  const ul = $("process-list");
  ul.textContent = "";
  for (const p of list.processes) {
    const li = document.createElement("li");
    const button = document.createElement("button");
    button.type = "button";
    button.id = "process-" + p.id;
    button.textContent = p.id;
    button.title = p.title || "";
    button.addEventListener("click", () => showProcess(p.id));
    li.appendChild(button);
    ul.appendChild(li);
  }
}

async function workspaceFiles() {
  const response = await api("/files");
  if (!response.ok) return [];
  return (await response.json()).files.map(f => f.name);
}

async function showProcess(id) {
  document.querySelectorAll("#process-list button").forEach(b => b.classList.toggle("current", b.id === "process-" + id));
  const description = await (await api("/processes/" + encodeURIComponent(id))).json();
  current = description;
  $("process-title").textContent = description.id + " — " + (description.title || "");
  $("process-description").textContent = description.description || "";
  const files = await workspaceFiles();
  const fields = $("fields");
  fields.textContent = "";
  for (const [name, input] of Object.entries(description.inputs || {})) {
    if (RESERVED.includes(name)) continue;
    fields.appendChild(field(name, input, files));
  }
  $("process-form").hidden = false;
}

function field(name, input, files) {
  const schema = input.schema || {};
  const required = (input.minOccurs ?? 1) > 0 && name !== "output";
  const div = document.createElement("div");
  div.className = "field";
  const label = document.createElement("label");
  label.htmlFor = "input-" + name;
  label.textContent = name + (required ? " *" : "");
  const unit = unitOf(name);
  if (unit) {
    const span = document.createElement("span");
    span.className = "unit";
    span.textContent = " (" + unit + ")";
    label.appendChild(span);
  }
  div.appendChild(label);
  const control = makeControl(name, schema, files, required);
  control.id = "input-" + name;
  control.name = name;
  div.appendChild(control);
  const help = document.createElement("small");
  help.textContent = input.description || input.title || "";
  div.appendChild(help);
  return div;
}

function option(select, value, text) {
  const o = document.createElement("option");
  o.value = value;
  o.textContent = text;
  select.appendChild(o);
  return o;
}

function makeControl(name, schema, files, required) {
  const values = allowedValues(schema);
  if (isFileInput(name)) {
    const select = document.createElement("select");
    if (!required) option(select, "", "(none)");
    for (const f of files) option(select, f, f);
    select.dataset.kind = "file";
    return select;
  }
  if (values) {
    const select = document.createElement("select");
    if (!("default" in schema)) option(select, "", "(default)");
    for (const v of values) {
      const o = option(select, v, String(v));
      if (schema.default === v) o.selected = true;
    }
    select.dataset.kind = "enum";
    select.dataset.default = "default" in schema ? String(schema.default) : "";
    return select;
  }
  const input = document.createElement("input");
  if (schema.type === "boolean") {
    input.type = "checkbox";
    input.checked = schema.default === true;
    input.dataset.kind = "boolean";
    input.dataset.default = String(schema.default === true);
    return input;
  }
  if (schema.type === "integer" || schema.type === "number") {
    input.type = "number";
    input.step = schema.type === "integer" ? "1" : "any";
    if (typeof schema.minimum === "number") input.min = schema.minimum;
    if (typeof schema.maximum === "number") input.max = schema.maximum;
    input.dataset.kind = schema.type;
  } else {
    input.type = "text";
    input.dataset.kind = schema.type === "array" ? "array" : "string";
    if (schema.type === "array") input.placeholder = "comma-separated";
    if (name === "output") input.placeholder = "(the job's own output.gpkg) or a file name";
  }
  if ("default" in schema) {
    input.value = String(schema.default);
    input.dataset.default = String(schema.default);
  }
  return input;
}

// The inputs that differ from their defaults, typed by their schema.
function collectInputs() {
  const inputs = {};
  for (const control of document.querySelectorAll("#fields [name]")) {
    const name = control.name;
    const kind = control.dataset.kind;
    if (kind === "boolean") {
      if (String(control.checked) !== control.dataset.default) inputs[name] = control.checked;
      continue;
    }
    const value = control.value.trim();
    if (value === "" || value === control.dataset.default) continue;
    if (kind === "integer" || kind === "number") inputs[name] = Number(value);
    else if (kind === "array") inputs[name] = value.split(",").map(v => v.trim()).filter(v => v);
    else inputs[name] = value;
  }
  return inputs;
}

async function run(event) {
  event.preventDefault();
  if (!current) return;
  const response = await api("/processes/" + encodeURIComponent(current.id) + "/execution", {
    method: "POST",
    headers: { "Content-Type": "application/json", "Prefer": "respond-async" },
    body: JSON.stringify({ inputs: collectInputs() }),
  });
  const body = await response.json();
  $("job").hidden = false;
  $("summary").textContent = "";
  $("job-links").textContent = "";
  $("preview-layer").textContent = "";
  $("preview").hidden = true;
  if (!response.ok) {
    $("job-id").textContent = "(refused)";
    setStatus({ status: "failed", message: body.detail || body.title, progress: 0 });
    return;
  }
  follow(body.jobID);
}

function setStatus(info) {
  const status = $("job-status");
  status.textContent = info.status;
  status.className = "status " + info.status;
  $("job-message").textContent = info.message || "";
  $("job-progress").value = info.progress || 0;
  $("job-percent").textContent = (info.progress || 0) + " %";
}

function follow(id) {
  $("job-id").textContent = id;
  if (polling) clearInterval(polling);
  const tick = async () => {
    const info = await (await api("/jobs/" + id)).json();
    setStatus(info);
    if (["successful", "failed", "dismissed"].includes(info.status)) {
      clearInterval(polling);
      polling = null;
      finished(info);
    }
  };
  polling = setInterval(tick, 500);
  tick();
}

async function finished(info) {
  const results = await api("/jobs/" + info.jobID + "/results");
  const body = await results.json();
  if (!results.ok) {
    $("summary").textContent = body.detail || JSON.stringify(body, null, 2);
    return;
  }
  $("summary").textContent = JSON.stringify(body.summary ? body.summary.value : body, null, 2);
  const links = $("job-links");
  for (const link of info.links || []) {
    if (link.rel === "enclosure") {
      const a = document.createElement("a");
      a.id = "download";
      a.href = link.href;
      a.textContent = "Download the output GeoPackage";
      a.addEventListener("click", download);
      links.appendChild(a);
    }
  }
  const select = $("preview-layer");
  for (const link of info.links || []) {
    if (link.rel === "preview") option(select, link.href, link.title);
  }
  if (select.options.length > 0) showPreview();
}

// With a token the browser cannot send the header itself: fetch the file, then save it.
async function download(event) {
  if (!token) return;
  event.preventDefault();
  const blob = await (await api(event.target.href)).blob();
  const a = document.createElement("a");
  a.href = URL.createObjectURL(blob);
  a.download = "output.gpkg";
  a.click();
}

async function showPreview() {
  const href = $("preview-layer").value;
  const img = $("preview");
  const response = await api(href);
  if (!response.ok) {
    img.hidden = true;
    return;
  }
  img.src = URL.createObjectURL(await response.blob());
  img.dataset.layer = $("preview-layer").selectedOptions[0].textContent;
  img.hidden = false;
}

async function upload() {
  const file = $("upload-file").files[0];
  if (!file) return;
  const response = await api("/files/" + encodeURIComponent(file.name), { method: "PUT", body: file });
  const body = await response.json();
  $("upload-status").textContent = response.ok ? "stored as " + body.name : body.detail;
  if (current) showProcess(current.id);
}

$("process-form").addEventListener("submit", run);
$("preview-layer").addEventListener("change", showPreview);
$("upload-button").addEventListener("click", upload);
loadProcesses();
