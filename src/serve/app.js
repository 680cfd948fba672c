// The upload page: sends the chosen files to /api/analyze and shows what comes back.
// All text from files and results is inserted with textContent (never as HTML).
"use strict";

const $ = (id) => document.getElementById(id);
let ids = [];

function cell(row, text, cls) {
  const td = document.createElement("td");
  td.textContent = text == null ? "" : String(text);
  if (cls) td.className = cls;
  row.appendChild(td);
  return td;
}

function link(parent, href, text) {
  const a = document.createElement("a");
  a.href = href;
  a.textContent = text;
  a.setAttribute("download", "");
  parent.appendChild(a);
  parent.appendChild(document.createTextNode(" "));
}

function showRun(run) {
  const tr = document.createElement("tr");
  if (run.status === "input_error") tr.className = "status-error";
  cell(tr, run.sample_id || "");
  cell(tr, run.file);
  if (run.status === "input_error") {
    const td = cell(tr, run.error + (run.hint ? " (" + run.hint + ")" : ""));
    td.colSpan = 5;
  } else {
    const eps = run.endpoints || [];
    cell(tr, eps.map((e) => e.volume_mL.toFixed(3) + " ± " + e.uncertainty_mL.toPrecision(2)).join("; ") || "none", "num");
    cell(tr, eps.map((e) => (e.pH != null ? e.pH.toFixed(2) : e.mV.toFixed(1) + " mV")).join("; "), "num");
    // Every result of the method, one per line.
    const results = run.results || [];
    const resCell = cell(tr, results.length ? "" : (run.result_error || ""), "num");
    const verdictCell = cell(tr, "");
    results.forEach((res, i) => {
      if (i > 0) { resCell.appendChild(document.createElement("br")); verdictCell.appendChild(document.createElement("br")); }
      resCell.appendChild(document.createTextNode(res.name + ": " + res.value.toFixed(res.decimals) + " " + res.unit +
                                                  " (U " + res.expanded_uncertainty.toFixed(res.decimals) + ")"));
      const v = document.createElement("span");
      v.textContent = res.spec && res.spec.verdict ? res.spec.verdict : "";
      if (res.spec && res.spec.verdict) v.className = res.spec.verdict;
      verdictCell.appendChild(v);
    });
    const flags = cell(tr, "");
    for (const e of eps) for (const f of e.flags || []) {
      const s = document.createElement("span");
      s.className = "flag";
      s.textContent = "EP" + e.index + " " + f;
      flags.appendChild(s);
    }
  }
  const dl = cell(tr, "");
  if (run.report) {
    const a = document.createElement("a");
    a.href = run.report;
    a.target = "_blank";
    a.rel = "noopener";
    a.textContent = "report";
    dl.appendChild(a);
    dl.appendChild(document.createTextNode(" "));
  }
  link(dl, run.downloads.json, "JSON");
  link(dl, run.downloads.text, "text");
  if (run.downloads.html) link(dl, run.downloads.html, "HTML");
  $("results").tBodies[0].appendChild(tr);
}

function showReplicates(reps) {
  const box = $("replicates");
  box.textContent = "";
  for (const r of reps || []) {
    const p = document.createElement("p");
    p.textContent = "Replicates of " + r.sample_id + " (" + r.result + "): n = " + r.n + ", mean " + r.mean.toPrecision(6) +
      ", RSD " + r.rsd_percent.toFixed(2) + " %" + (r.outlier != null ? ", one suspect outlier flagged" : "");
    box.appendChild(p);
  }
}

async function upload(files) {
  if (!files.length) return;
  const form = new FormData();
  for (const f of files) form.append("file", f, f.name);
  for (const key of ["method", "sample_volume", "titrant_conc", "titrant"]) {
    const v = $(key).value;
    if (v) form.append(key, v);
  }
  $("status").textContent = "Analysing " + files.length + " file(s)…";
  try {
    const resp = await fetch("/api/analyze", { method: "POST", body: form });
    const body = await resp.json();
    if (!resp.ok) {
      $("status").textContent = "The server refused the upload: " + (body.error || resp.status);
      return;
    }
    for (const run of body.runs) {
      showRun(run);
      ids.push(run.id);
    }
    showReplicates(body.replicates);
    $("status").textContent = body.runs.length + " file(s) analysed.";
    const csv = $("csv");
    csv.href = "/api/results.csv?ids=" + ids.join(",");
    csv.hidden = false;
  } catch (err) {
    $("status").textContent = "Upload failed: " + err;
  }
}

async function loadMethods() {
  try {
    const resp = await fetch("/api/methods");
    const body = await resp.json();
    for (const m of body.methods || []) {
      const o = document.createElement("option");
      o.value = m.file;
      o.textContent = (m.name || m.file) + (m.error ? " (cannot be used)" : "");
      o.disabled = !!m.error;
      $("method").appendChild(o);
    }
    if (!(body.methods || []).length) $("method-note").textContent = "no method folder on this server";
  } catch (err) {
    $("method-note").textContent = "methods could not be listed";
  }
}

window.addEventListener("DOMContentLoaded", () => {
  const drop = $("drop");
  const input = $("files");
  drop.addEventListener("click", () => input.click());
  drop.addEventListener("keydown", (e) => { if (e.key === "Enter" || e.key === " ") input.click(); });
  input.addEventListener("change", () => { upload(Array.from(input.files)); input.value = ""; });
  drop.addEventListener("dragover", (e) => { e.preventDefault(); drop.classList.add("over"); });
  drop.addEventListener("dragleave", () => drop.classList.remove("over"));
  drop.addEventListener("drop", (e) => {
    e.preventDefault();
    drop.classList.remove("over");
    upload(Array.from(e.dataTransfer.files));
  });
  loadMethods();
});
