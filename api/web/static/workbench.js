// tristock workbench: the page's one script. It calls the JSON API (/v1/...) and the page's
// figure routes (/ui/...) of this same server and draws what they answer: no physics here.
"use strict";

const $ = (sel, root) => (root || document).querySelector(sel);
const $$ = (sel, root) => Array.from((root || document).querySelectorAll(sel));
const TOKEN_KEY = "tristock.token";
const state = { result: null, spec: null, candidate: null, sort: { key: "rank", dir: 1 } };

function el(tag, attrs, ...children) {
  const node = document.createElement(tag);
  for (const [k, v] of Object.entries(attrs || {})) {
    if (v === null || v === undefined || v === false) continue;
    if (k === "text") node.textContent = v;
    else if (k === "onclick") node.addEventListener("click", v);
    else node.setAttribute(k, v === true ? "" : v);
  }
  for (const c of children.flat()) {
    if (c !== null && c !== undefined) node.append(c instanceof Node ? c : String(c));
  }
  return node;
}

function status(text) { $("#status").textContent = text; }

// ---- the API -----------------------------------------------------------------------------
async function call(method, url, body, headers) {
  const init = { method, headers: Object.assign({}, headers || {}) };
  if (body !== undefined) {
    init.headers["Content-Type"] = "application/json";
    init.body = JSON.stringify(body);
  }
  for (let attempt = 0; ; attempt++) {
    const res = await fetch(url, init);
    if (res.status === 503 && attempt < 4) {  // every compute slot busy: wait and retry
      await new Promise((r) => setTimeout(r, 1000 * (attempt + 1)));
      continue;
    }
    const type = res.headers.get("Content-Type") || "";
    const data = type.includes("json") ? await res.json() : await res.text();
    return { ok: res.ok, status: res.status, data, headers: res.headers };
  }
}

function problemText(p) {
  if (!p || typeof p !== "object") return String(p);
  const where = (p.errors || []).map((e) => `${e.field}: ${e.msg}`).join("; ");
  return `${p.title || "error"} (${p.status}): ${where || p.detail || ""}`;
}

function fmt(x, digits) {
  if (x === null || x === undefined) return "";
  if (typeof x !== "number") return String(x);
  return Number(x.toPrecision(digits || 5)).toString();
}
function pct(x, digits) { return x === null || x === undefined ? "" : `${(100 * x).toFixed(digits ?? 2)} %`; }

function saveFile(name, text, type) {
  const url = URL.createObjectURL(new Blob([text], { type }));
  const a = el("a", { href: url, download: name });
  document.body.append(a);
  a.click();
  a.remove();
  setTimeout(() => URL.revokeObjectURL(url), 10000);
}

// ---- views -------------------------------------------------------------------------------
function show(view) {
  const name = $(`#view-${view}`) ? view : "spec";
  for (const s of $$(".view")) s.hidden = s.id !== `view-${name}`;
  for (const a of $$("nav a[data-view]")) {
    if (a.dataset.view === name) a.setAttribute("aria-current", "page");
    else a.removeAttribute("aria-current");
  }
  if (name === "stock" && !$("#stock-box").childElementCount) loadStock();
  if (name === "registry" && !$("#registry-box").childElementCount) loadRegistry();
}
function go(view) {
  if (location.hash !== `#${view}`) location.hash = view;
  else show(view);
  $("#main").focus();
}

// ---- the spec form -----------------------------------------------------------------------
const KINDS = JSON.parse($("#kinds-data").textContent);
const EXAMPLES = JSON.parse($("#examples-data").textContent);
const fieldId = (path) => `f-${path.replaceAll(".", "-")}`;

function sectionOn(name) {
  const box = $(`#use-${name}`);
  return !box || box.checked;
}
function markSections() {
  for (const box of $$("[data-include]")) {
    const section = $(`#sec-${box.dataset.include}`);
    section.classList.toggle("off", !box.checked);
    section.disabled = !box.checked;  // the "use" box sits in the legend and stays enabled
  }
}

function readSpec() {
  const spec = {};
  for (const [path, kind] of Object.entries(KINDS)) {
    const [section, field] = path.split(".");
    if (!sectionOn(section)) continue;
    const input = $(`#${fieldId(path)}`);
    let value;
    if (kind === "flag") value = input.checked;
    else {
      const raw = input.value.trim();
      if (raw === "") { spec[section] = spec[section] || {}; continue; }
      if (kind === "number" || kind === "integer") value = /^[-+]?(\d+\.?\d*|\.\d+)(e[-+]?\d+)?$/i.test(raw) ? Number(raw) : raw;
      else if (kind === "list") value = raw.split(",").map((s) => s.trim()).filter((s) => s);
      else if (kind === "text") value = /^\d+$/.test(raw) ? Number(raw) : raw;
      else value = raw;
    }
    spec[section] = spec[section] || {};
    spec[section][field] = value;
  }
  return spec;
}

function fillSpec(spec) {
  clearErrors();
  for (const [path, kind] of Object.entries(KINDS)) {
    const [section, field] = path.split(".");
    const input = $(`#${fieldId(path)}`);
    const value = spec[section] ? spec[section][field] : undefined;
    if (kind === "flag") input.checked = value === undefined ? true : Boolean(value);
    else if (Array.isArray(value)) input.value = value.join(", ");
    else input.value = value === undefined || value === null ? "" : String(value);
  }
  for (const box of $$("[data-include]")) box.checked = Boolean(spec[box.dataset.include]);
  markSections();
}

function clearErrors(root) {
  for (const e of $$(".error", root)) e.textContent = "";
  for (const i of $$("[aria-invalid]", root)) i.removeAttribute("aria-invalid");
}

// Put each 422 item beside its field: loc is ["body", "spec", section, field, ...].
function showSpecErrors(problem) {
  const general = [];
  for (const e of problem.errors || []) {
    const loc = e.loc.slice(1);
    let target = null;
    if (loc[0] === "spec" && loc.length >= 3) {
      const input = $(`#${fieldId(`${loc[1]}.${loc[2]}`)}`);
      if (input) { input.setAttribute("aria-invalid", "true"); target = $(`#err-${input.id}`); }
    }
    if (!target && loc[0] === "spec" && loc.length >= 2) target = $(`#err-${loc[1]}`);
    if (!target && loc[0] === "time_limit_s") target = $("#err-run-time");
    if (target) target.textContent = (target.textContent ? target.textContent + "; " : "") + e.msg;
    else general.push(`${e.field}: ${e.msg}`);
  }
  if (general.length || !(problem.errors || []).length) {
    $("#err-spec").textContent = general.join("; ") || problemText(problem);
  }
  const first = $("[aria-invalid='true']") || $("#err-spec");
  if (first && first.focus) first.focus();
}

async function runSearch(event) {
  event.preventDefault();
  clearErrors($("#spec-form"));
  const spec = readSpec();
  const body = { spec, engine: $("#run-engine").value };
  const limit = $("#run-time").value.trim();
  if (limit) body.time_limit_s = /^[\d.eE+-]+$/.test(limit) ? Number(limit) : limit;
  const expected = body.time_limit_s > 0 ? body.time_limit_s : (spec.tuning ? 30 : 5);
  const started = performance.now();
  $("#run").disabled = true;
  $("#progress").hidden = false;
  $("#progress-bar").removeAttribute("value");
  const tick = setInterval(() => {
    const s = (performance.now() - started) / 1000;
    $("#progress-bar").value = Math.min(s / expected, 1);
    $("#progress-text").textContent = `searching: ${s.toFixed(1)} s of at most ${expected} s`;
  }, 200);
  status("searching…");
  try {
    const res = await call("POST", "/v1/design", body);
    if (!res.ok) {
      go("spec");
      if (res.status === 422) showSpecErrors(res.data);
      else $("#err-spec").textContent = problemText(res.data);
      status("the search was refused");
      return;
    }
    state.result = res.data;
    state.spec = res.data.spec;
    state.sort = { key: "rank", dir: 1 };
    renderAnswers();
    status(`${res.data.candidates.length} designs`);
    go("answers");
  } catch (err) {
    status(`request failed: ${err}`);
  } finally {
    clearInterval(tick);
    $("#progress").hidden = true;
    $("#run").disabled = false;
  }
}

async function showToml() {
  clearErrors($("#spec-form"));
  const res = await call("POST", "/ui/spec.toml", { spec: readSpec() });
  if (!res.ok) { if (res.status === 422) showSpecErrors(res.data); return; }
  $("#toml").textContent = res.data;
  $("#toml-box").hidden = false;
}

// ---- answers -----------------------------------------------------------------------------
const COLUMNS = [
  ["rank", "rank", (c) => c.rank, true],
  ["U1", "U1", (c) => c.parts.U1 && c.parts.U1.id],
  ["R1", "R1", (c) => c.parts.R1 && c.parts.R1.display],
  ["R2", "R2", (c) => c.parts.R2 && c.parts.R2.display],
  ["R3", "R3 (or R3A / R3B)", (c) => c.parts.R3 ? c.parts.R3.display
    : c.parts.R3A && `${c.parts.R3A.display} / ${c.parts.R3B.display}`],
  ["C1", "C1", (c) => c.parts.C1 && c.parts.C1.display],
  ["f", "f (Hz)", (c) => c.predicted.frequency_hz, true],
  ["ferr", "f error (%)", (c) => c.error.frequency_pct, true],
  ["amp", "A (Vpp)", (c) => c.predicted.amplitude_vpp, true],
  ["aerr", "A error (%)", (c) => c.error.amplitude_pct, true],
  ["duty", "duty (%)", (c) => 100 * c.predicted.duty_high, true],
  ["yield", "yield (%)", (c) => 100 * c.yield_fraction, true],
  ["cost", "cost", (c) => c.cost, true],
  ["lines", "BOM lines", (c) => c.bom_lines, true],
];

function renderAnswers() {
  const r = state.result;
  const box = $("#answers-box");
  box.replaceChildren();
  const s = r.search;
  $("#search-info").textContent = `${s.engine}, ${s.proven_optimal ? "proven optimal" : "cut by the time limit"}` +
    ` in ${s.elapsed_s.toFixed(2)} s (limit ${s.time_limit_s} s), ${s.evaluated} evaluated of ${s.combinations} combinations`;
  for (const c of r.cautions || []) box.append(el("p", { class: "info", text: c }));
  if (r.infeasible) {
    box.append(el("p", { class: "bad", text: "No design meets this spec:" }),
      el("ul", {}, r.infeasible.reasons.map((x) => el("li", { text: x }))));
    return;
  }
  const col = COLUMNS.find((c) => c[0] === state.sort.key);
  const rows = r.candidates.slice().sort((a, b) => {
    const x = col[2](a), y = col[2](b);
    const order = typeof x === "number" ? x - y : String(x).localeCompare(String(y));
    return state.sort.dir * order;
  });
  const head = el("tr", {}, COLUMNS.map(([key, label, , num]) => el("th", {
    scope: "col", class: num ? "num" : null,
    "aria-sort": state.sort.key === key ? (state.sort.dir > 0 ? "ascending" : "descending") : null,
  }, el("button", { type: "button", onclick: () => sortBy(key) }, label,
    el("span", { "aria-hidden": "true", class: "sort" }, state.sort.key !== key ? " ↕" : state.sort.dir > 0 ? " ↑" : " ↓")))), el("th", { scope: "col", text: "flags" }), el("th", { scope: "col", text: "" }));
  const body = rows.map((c) => el("tr", { "data-rank": c.rank, "data-parts": Object.entries(c.parts).map(([d, p]) => `${d}=${p.id}`).join(" ") },
    COLUMNS.map(([key, , get, num]) => {
      const v = get(c);
      const text = key === "rank" || key === "lines" ? String(v) : typeof v === "number" ? fmt(v, key === "f" ? 6 : 4) : v;
      return el("td", { class: num ? "num" : null, "data-col": key }, text);
    }),
    el("td", {}, flags(c)),
    el("td", {}, el("button", { type: "button", class: "open", onclick: () => openDesign(c) }, `open #${c.rank}`))));
  box.append(el("table", { id: "answers" }, el("caption", { class: "hint", text: "Ranked designs; sort with the column buttons" }),
    el("thead", {}, head), el("tbody", {}, body)));
}

function flags(c) {
  const out = (c.warnings || []).map((w) => el("span", { class: `flag ${w.severity === "error" ? "error" : ""}`, title: w.message }, w.code));
  if (c.trim) out.push(el("span", { class: "flag", title: "trimmed design" }, "trim"));
  if (c.tuning) out.push(el("span", { class: "flag", title: "tuned design" }, `${c.tuning.ranges.length} ranges`));
  return out;
}

function sortBy(key) {
  state.sort = { key, dir: state.sort.key === key ? -state.sort.dir : 1 };
  renderAnswers();
  const th = $(`#answers th[aria-sort] button`);
  if (th) th.focus();
}

// ---- one design --------------------------------------------------------------------------
function designBody(c) {
  const f = c.design_file;
  return { spec: f.spec, parts: f.parts, wiper: f.wiper, range: f.range, topology: f.topology };
}

function kv(rows) {
  return el("table", {}, el("tbody", {}, rows.map(([k, v]) => el("tr", {}, el("th", { scope: "row", text: k }), el("td", { class: "num" }, v)))));
}

function openDesign(c) {
  state.candidate = c;
  const box = $("#design-box");
  box.replaceChildren();
  const sketches = JSON.parse($("#sketches-data").textContent);
  const topology = c.topology || $("#sketches-data").dataset.default;
  const parts = el("table", { id: "parts" }, el("thead", {}, el("tr", {}, ["designator", "stock code", "kind", "value", "tolerance", "pieces/board", "unit cost", "stock"].map((h) => el("th", { scope: "col", text: h })))),
    el("tbody", {}, Object.entries(c.parts).map(([d, p]) => el("tr", {}, el("th", { scope: "row", text: d }), el("td", { text: p.id }), el("td", { text: p.kind }),
      el("td", { text: p.display }), el("td", { class: "num", text: p.tolerance_pct === null || p.tolerance_pct === undefined ? "" : `±${p.tolerance_pct} %` }),
      el("td", { class: "num", text: p.pieces_per_board }), el("td", { class: "num", text: fmt(p.unit_cost, 4) }), el("td", { class: "num", text: p.stock })))));
  const pr = c.predicted;
  box.append(
    el("h3", { text: `Rank ${c.rank}: ${Object.values(c.parts).map((p) => p.id).join(" · ")}` }),
    el("div", { class: "downloads" },
      el("button", { type: "button", id: "dl-design", onclick: () => downloadDesign(c) }, "Download DESIGN"),
      el("button", { type: "button", id: "dl-bom", onclick: () => downloadExport(c, "bom") }, "Download BOM (CSV)"),
      el("button", { type: "button", id: "dl-spice", onclick: () => downloadExport(c, "spice") }, "Download SPICE netlist"),
      el("button", { type: "button", onclick: () => { fillReopt(c); go("reoptimise"); } }, "Re-optimise…"),
      el("span", { id: "dl-result", class: "info", role: "status" })),
    el("div", { class: "grid2" },
      el("div", {}, el("h3", { text: "Parts" }), parts,
        el("h3", { text: "Predicted (nominal, 25 °C)" }),
        kv([["frequency", `${fmt(pr.frequency_hz, 6)} Hz`], ["triangle amplitude", `${fmt(pr.amplitude_vpp, 5)} Vpp`],
          ["duty (high)", pct(pr.duty_high)], ["offset", `${fmt(pr.offset_v, 4)} V`],
          ["square levels", `${fmt(pr.square_low_v, 4)} V / ${fmt(pr.square_high_v, 4)} V`], ["timing share", pct(pr.timing_share)],
          ["cost per board", fmt(c.cost, 4)], ["BOM lines", String(c.bom_lines)]]),
        el("h3", { text: "Warnings" }),
        (c.warnings || []).length ? el("ul", {}, c.warnings.map((w) => el("li", {}, el("b", { text: `${w.code} (${w.severity}): ` }), w.message))) : el("p", { class: "info", text: "none" })),
      el("div", {}, el("h3", { text: "Circuit" }), el("pre", { id: "sketch", "aria-label": "circuit sketch with designators", text: sketches[topology] || "" }))),
    c.parts.RV1 ? el("form", { id: "setting", class: "toolbar" },
      el("label", { for: "set-wiper" }, "wiper (0..1)"), el("input", { id: "set-wiper", type: "text", inputmode: "decimal", value: String(c.design_file.wiper) }),
      c.tuning ? [el("label", { for: "set-range" }, "range"), el("select", { id: "set-range" }, c.tuning.ranges.map((r) => el("option", { value: r.capacitor, selected: r.capacitor === c.design_file.range }, r.capacitor)))] : null,
      el("button", { type: "submit" }, "Redraw at this setting"), el("span", { id: "err-setting", class: "error", role: "alert" })) : null,
    el("form", { id: "release", class: "toolbar" },
      el("label", { for: "release-name" }, "release as"), el("input", { id: "release-name", type: "text", placeholder: "name, e.g. sweep-ref" }),
      el("label", { for: "release-note" }, "note"), el("input", { id: "release-note", type: "text" }),
      el("button", { type: "submit" }, "Release"), el("span", { id: "release-result", role: "alert" })),
    el("h3", { text: "Waveform" }), el("div", { id: "fig-waveform", class: "figure", "aria-busy": "true" }, el("p", { class: "info", text: "simulating…" })),
    el("h3", { text: "Monte Carlo" }), el("div", { id: "fig-histograms", class: "figure", "aria-busy": "true" }, el("p", { class: "info", text: "sampling…" })),
    el("div", { id: "analysis", class: "grid2" }, el("p", { class: "info", text: "analysing…" })));
  if (c.trim) box.append(el("h3", { text: "Trim" }), kv(Object.entries(c.trim).map(([k, v]) => [k, Array.isArray(v) ? v.map((x) => fmt(x)).join(" .. ") : fmt(v)])));
  if (c.tuning) {
    box.append(el("h3", { text: "Dial law" }), el("div", { id: "fig-dial", class: "figure" }),
      el("table", {}, el("thead", {}, el("tr", {}, ["range", "target low (Hz)", "target high (Hz)", "guaranteed low (Hz)", "guaranteed high (Hz)"].map((h) => el("th", { scope: "col", text: h })))),
        el("tbody", {}, c.tuning.ranges.map((r) => el("tr", {}, el("th", { scope: "row", text: r.capacitor }),
          [r.low_hz, r.high_hz, r.guaranteed_low_hz, r.guaranteed_high_hz].map((x) => el("td", { class: "num", text: fmt(x, 5) })))))));
  }
  go("design");
  if ($("#setting")) $("#setting").addEventListener("submit", (e) => { e.preventDefault(); redraw(c); });
  $("#release").addEventListener("submit", (e) => { e.preventDefault(); release(c); });
  loadFigures(c, designBody(c));
}

function redraw(c) {
  const raw = $("#set-wiper").value.trim();
  const body = designBody(c);
  body.wiper = /^[\d.eE+-]+$/.test(raw) ? Number(raw) : raw;
  if ($("#set-range")) body.range = $("#set-range").value;
  $("#err-setting").textContent = "";
  for (const id of ["fig-waveform", "fig-histograms"]) $(`#${id}`).setAttribute("aria-busy", "true");
  loadFigures(c, body, true);
}

async function release(c) {
  const headers = {};
  const token = sessionStorage.getItem(TOKEN_KEY);
  if (token) headers.Authorization = `Bearer ${token}`;
  const body = { name: $("#release-name").value.trim(), design: designBody(c), note: $("#release-note").value };
  const res = await call("POST", "/v1/designs", body, headers);
  const out = $("#release-result");
  out.className = res.ok ? "ok" : "bad";
  out.textContent = res.ok ? `released ${res.data.name} revision ${res.data.revision}` : `refused: ${problemText(res.data)}`;
  if (res.ok) $("#registry-box").replaceChildren();
}

async function figure(id, url, body) {
  const res = await call("POST", url, body);
  const target = $(`#${id}`);
  target.removeAttribute("aria-busy");
  if (res.ok) target.innerHTML = res.data;
  else target.replaceChildren(el("p", { class: "bad", text: problemText(res.data) }));
}

async function loadFigures(c, body, again) {
  const tune = c.design_file.spec.tuning;
  if (c.tuning && !again) figure("fig-dial", "/ui/figures/dial-law.svg", { tuning: c.tuning, wanted_hz: tune ? [tune.low_hz, tune.high_hz] : null });
  await Promise.all([loadAnalysis(body), figure("fig-waveform", "/ui/figures/waveform.svg", body)]);
  await figure("fig-histograms", "/ui/figures/histograms.svg", body);
}

async function loadAnalysis(body) {
  const res = await call("POST", "/v1/analyse", body);
  const box = $("#analysis");
  box.replaceChildren();
  if (!res.ok) { box.append(el("p", { class: "bad", text: problemText(res.data) })); return; }
  const a = res.data, w = a.worst_case, y = a.yield;
  const extremes = Object.keys(w.corners);
  box.append(
    el("div", {}, el("h3", { text: "Yield" }),
      kv([["yield", pct(y.fraction)], ["95 % interval", `${pct(y.confidence_interval[0])} .. ${pct(y.confidence_interval[1])}`],
        ["boards", `${y.passed} of ${y.samples} (${y.distribution}, seed ${y.seed})`],
        ["drift of f", `${fmt(a.drift.frequency_ppm_per_c, 3)} ppm/°C`], ["drift of A", `${fmt(a.drift.amplitude_ppm_per_c, 3)} ppm/°C`]]),
      el("h3", { text: "Worst case" }),
      el("table", { id: "worst-case" }, el("thead", {}, el("tr", {}, el("th", { scope: "col", text: "metric" }), el("th", { scope: "col", class: "num", text: "lowest" }), el("th", { scope: "col", class: "num", text: "highest" }))),
        el("tbody", {}, [["frequency (Hz)", w.frequency_hz], ["amplitude (Vpp)", w.amplitude_vpp], ["duty (high)", w.duty_high]].map(([k, v]) =>
          el("tr", {}, el("th", { scope: "row", text: k }), el("td", { class: "num", text: fmt(v[0], 6) }), el("td", { class: "num", text: fmt(v[1], 6) }))))),
      el("p", { class: "hint", text: `${w.method}, ${w.evaluations} evaluations` })),
    el("div", {}, el("h3", { text: "Sensitivity S = ∂ln y/∂ln x" }), bars(a.sensitivity)),
    el("div", {}, el("h3", { text: "Where the extremes occur" }),
      el("table", { id: "corners" }, el("thead", {}, el("tr", {}, el("th", { scope: "col", text: "variable" }), extremes.map((e) => el("th", { scope: "col", text: e })))),
        el("tbody", {}, w.variables.map((v) => el("tr", {}, el("th", { scope: "row", text: v }), extremes.map((e) => el("td", { text: (w.corners[e] || {})[v] || "" }))))))));
}

function bars(sens) {
  const names = Array.from(new Set([...Object.keys(sens.frequency), ...Object.keys(sens.amplitude)]));
  const big = Math.max(1e-12, ...names.map((n) => Math.max(Math.abs(sens.frequency[n] || 0), Math.abs(sens.amplitude[n] || 0))));
  names.sort((a, b) => Math.abs(sens.frequency[b] || 0) - Math.abs(sens.frequency[a] || 0));
  const bar = (v) => el("td", { class: "bar" }, el("span", { class: v < 0 ? "neg" : null, style: `width:${(100 * Math.abs(v || 0) / big).toFixed(1)}%` }));
  return el("table", { class: "bars", id: "sensitivity" },
    el("thead", {}, el("tr", {}, ["variable", "S of f", "", "S of A", ""].map((h) => el("th", { scope: "col", text: h })))),
    el("tbody", {}, names.map((n) => el("tr", {}, el("th", { scope: "row", text: n }),
      el("td", { class: "num", text: fmt(sens.frequency[n] || 0, 3) }), bar(sens.frequency[n]),
      el("td", { class: "num", text: fmt(sens.amplitude[n] || 0, 3) }), bar(sens.amplitude[n])))));
}

async function downloadDesign(c) {
  const res = await call("POST", "/ui/design.toml", c.design_file);
  if (res.ok) saveFile(`design-rank${c.rank}.toml`, res.data, "application/toml");
  $("#dl-result").textContent = res.ok ? "DESIGN file saved" : problemText(res.data);
}

async function downloadExport(c, what) {
  const res = await call("POST", `/v1/export/${what}`, designBody(c));
  if (res.ok) saveFile(what === "bom" ? `bom-rank${c.rank}.csv` : `rank${c.rank}.cir`, res.data, what === "bom" ? "text/csv" : "text/plain");
  $("#dl-result").textContent = res.ok ? `${what.toUpperCase()} saved` : problemText(res.data);
}

// ---- stock -------------------------------------------------------------------------------
const stock = { kind: null, items: [], editing: null, loading: 0 };

async function loadStock() {
  const kind = $("#stock-kind").value;
  const ticket = ++stock.loading;  // a later load (the kind changed meanwhile) wins
  const items = [];
  for (let offset = 0; ; ) {
    const res = await call("GET", `/v1/catalog/${kind}?limit=500&offset=${offset}`);
    if (ticket !== stock.loading) return;
    if (!res.ok) { $("#stock-result").textContent = problemText(res.data); return; }
    items.push(...res.data.items);
    offset += res.data.items.length;
    if (offset >= res.data.total || !res.data.items.length) break;
  }
  Object.assign(stock, { kind, items });
  renderStock();
}

function renderStock() {
  const words = $("#stock-filter").value.trim().toLowerCase().split(/\s+/).filter((w) => w);
  const rows = stock.items.filter((it) => {
    const text = Object.values(it).join(" ").toLowerCase();
    return words.every((w) => text.includes(w));
  });
  const keys = stock.items.length ? Object.keys(stock.items[0]) : [];
  $("#stock-count").textContent = `${rows.length} of ${stock.items.length} rows`;
  $("#stock-box").replaceChildren(el("table", { id: "stock-table" },
    el("thead", {}, el("tr", {}, keys.map((k) => el("th", { scope: "col", text: k })), el("th", { scope: "col", text: "" }))),
    el("tbody", {}, rows.slice(0, 400).map((it) => el("tr", { "data-id": it.id },
      keys.map((k) => el("td", { class: typeof it[k] === "number" ? "num" : null, "data-col": k, text: it[k] === null ? "" : String(it[k]) })),
      el("td", {}, el("button", { type: "button", "aria-label": `edit stock of ${it.id}`, onclick: () => editStock(it) }, "edit")))))));
}

function editStock(it) {
  stock.editing = it;
  $("#stock-edit").hidden = false;
  $("#stock-edit-what").textContent = `${it.id}: ${it.stock} on hand`;
  $("#stock-new").value = String(it.stock);
  $("#stock-result").textContent = "";
  $("#stock-new").focus();
}

async function saveStock(event) {
  event.preventDefault();
  const it = stock.editing;
  if (!it) return;
  const raw = $("#stock-new").value.trim();
  const value = /^\d+$/.test(raw) ? Number(raw) : raw;
  const url = `/v1/catalog/${stock.kind}/${encodeURIComponent(it.id)}`;
  const current = await call("GET", url);
  if (!current.ok) { $("#stock-result").textContent = problemText(current.data); return; }
  const headers = { "If-Match": current.headers.get("ETag") };
  const token = sessionStorage.getItem(TOKEN_KEY);
  if (token) headers.Authorization = `Bearer ${token}`;
  const res = await call("PATCH", url, { stock: value }, headers);
  if (res.ok) {
    Object.assign(it, res.data);
    $("#stock-result").textContent = `saved: ${it.id} now ${res.data.stock} on hand`;
    $("#stock-result").className = "ok";
    $("#stock-edit").hidden = true;
    renderStock();
  } else {
    $("#stock-result").textContent = `refused: ${problemText(res.data)}`;
    $("#stock-result").className = "bad";
  }
}

// ---- re-optimise -------------------------------------------------------------------------
function fillReopt(c) {
  $("#reopt-text").value = JSON.stringify(c.design_file, null, 2);
}

async function runReopt(event) {
  event.preventDefault();
  clearErrors($("#reopt-form"));
  const box = $("#reopt-box");
  const parsed = await call("POST", "/ui/design.json", { text: $("#reopt-text").value });
  if (!parsed.ok) { $("#err-reopt-text").textContent = problemText(parsed.data); return; }
  const body = Object.assign({}, parsed.data);
  body.without = $("#reopt-without").value.split(",").map((s) => s.trim()).filter((s) => s);
  const boards = $("#reopt-boards").value.trim();
  if (boards) body.boards = /^\d+$/.test(boards) ? Number(boards) : boards;
  box.replaceChildren(el("p", { class: "info", text: "re-optimising…" }));
  const res = await call("POST", "/v1/reoptimise", body);
  if (!res.ok) {
    box.replaceChildren();
    for (const e of res.data.errors || []) {
      const t = e.loc[1] === "without" ? "#err-reopt-without" : e.loc[1] === "boards" ? "#err-reopt-boards" : "#err-reopt-text";
      $(t).textContent = `${e.field}: ${e.msg}`;
    }
    if (!(res.data.errors || []).length) box.append(el("p", { class: "bad", text: problemText(res.data) }));
    return;
  }
  const r = res.data;
  box.replaceChildren(
    el("p", {}, `original design ${r.original.passes ? "passes" : "fails"}`, r.original.reasons.length ? `: ${r.original.reasons.join("; ")}` : ""),
    r.shortfall.length ? el("p", { class: "bad", text: `short: ${r.shortfall.map((s) => `${s.designator} ${s.id} needs ${s.needed}, has ${s.stock}`).join("; ")}` }) : "",
    r.infeasible ? el("ul", {}, r.infeasible.reasons.map((x) => el("li", { text: x }))) : "",
    el("table", { id: "reopt-table" }, el("thead", {}, el("tr", {}, ["rank", "changed", "changes", "f (Hz)", "A (Vpp)", "yield", "cost", ""].map((h) => el("th", { scope: "col", text: h })))),
      el("tbody", {}, r.candidates.map((c) => el("tr", {}, el("td", { text: c.rank }), el("td", { text: c.changed.join(", ") || "none" }),
        el("td", {}, c.changes.map((x) => el("div", { text: `${x.designator}: ${x.from_id ?? "(none)"} → ${x.to_id ?? "(none)"} (${x.why})` }))),
        el("td", { class: "num", text: fmt(c.predicted.frequency_hz, 6) }), el("td", { class: "num", text: fmt(c.predicted.amplitude_vpp, 5) }),
        el("td", { class: "num", text: pct(c.yield_fraction) }), el("td", { class: "num", text: fmt(c.cost, 4) }),
        el("td", {}, c.design_file ? el("button", { type: "button", onclick: () => openDesign(c) }, "open") : ""))))));
}

// ---- released designs and impact ---------------------------------------------------------
function table(rows, id) {
  if (!rows.length) return el("p", { class: "info", text: "none" });
  const keys = Object.keys(rows[0]);
  const cell = (v) => (v !== null && typeof v === "object" ? JSON.stringify(v) : v === null ? "" : String(v));
  return el("table", { id }, el("thead", {}, el("tr", {}, keys.map((k) => el("th", { scope: "col", text: k })))),
    el("tbody", {}, rows.map((r) => el("tr", {}, keys.map((k) => el("td", { text: cell(r[k]) }))))));
}

async function loadRegistry() {
  const res = await call("GET", "/v1/designs");
  const box = $("#registry-box");
  if (!res.ok) { box.replaceChildren(el("p", { class: "bad", text: problemText(res.data) })); return; }
  const rows = Array.isArray(res.data) ? res.data : res.data.designs || res.data.items || [];
  box.replaceChildren(table(rows, "registry-table"));
  for (const tr of $$("#registry-table tbody tr")) {
    const name = tr.firstChild.textContent;
    tr.append(el("td", {}, el("button", { type: "button", onclick: () => reoptReleased(name) }, `re-optimise ${name}`)));
  }
}

async function reoptReleased(name) {
  const res = await call("GET", `/v1/designs/${encodeURIComponent(name)}`);
  if (!res.ok) { status(problemText(res.data)); return; }
  $("#reopt-text").value = JSON.stringify({ spec: res.data.spec, ...res.data.design }, null, 2);
  go("reoptimise");
}

function whatIf() {
  const out = [];
  for (const item of $("#impact-what-if").value.split(",").map((x) => x.trim()).filter((x) => x)) {
    const [id, count] = item.split("=").map((x) => x.trim());
    out.push({ id, stock: /^\d+$/.test(count || "") ? Number(count) : count });
  }
  return out;
}

async function runImpact() {
  const box = $("#impact-box");
  box.replaceChildren(el("p", { class: "info", text: "computing the impact…" }));
  const res = await call("POST", "/v1/impact", { what_if: whatIf() });
  if (!res.ok) { box.replaceChildren(el("p", { class: "bad", text: problemText(res.data) })); return; }
  box.replaceChildren(el("h3", { text: "Impact" }), ...Object.entries(res.data).map(([k, v]) =>
    Array.isArray(v) && v.length && typeof v[0] === "object" ? el("div", {}, el("h3", { text: k }), table(v))
      : el("p", {}, el("b", { text: `${k}: ` }), typeof v === "object" ? JSON.stringify(v) : String(v))));
}

// ---- start -------------------------------------------------------------------------------
function start() {
  $("#spec-form").addEventListener("submit", runSearch);
  $("#show-toml").addEventListener("click", showToml);
  $("#copy-toml").addEventListener("click", () => navigator.clipboard.writeText($("#toml").textContent).then(
    () => status("spec copied"), () => status("copy refused by the browser: select the text instead")));
  $("#download-toml").addEventListener("click", () => saveFile("spec.toml", $("#toml").textContent, "application/toml"));
  for (const b of $$("[data-example]")) b.addEventListener("click", () => { fillSpec(EXAMPLES[b.dataset.example]); status(`example ${b.dataset.example} loaded`); });
  $("#clear-form").addEventListener("click", () => fillSpec({}));
  for (const box of $$("[data-include]")) box.addEventListener("change", markSections);
  $("#stock-kind").addEventListener("change", loadStock);
  $("#stock-filter").addEventListener("input", renderStock);
  $("#stock-edit").addEventListener("submit", saveStock);
  $("#stock-cancel").addEventListener("click", () => { $("#stock-edit").hidden = true; });
  $("#token").value = sessionStorage.getItem(TOKEN_KEY) || "";
  const keep = (e) => { e.preventDefault(); sessionStorage.setItem(TOKEN_KEY, $("#token").value); status("token kept for this tab"); };
  $("#token-keep").addEventListener("click", keep);
  $("#token-form").addEventListener("submit", keep);
  $("#token-forget").addEventListener("click", () => { sessionStorage.removeItem(TOKEN_KEY); $("#token").value = ""; status("token forgotten"); });
  $("#reopt-form").addEventListener("submit", runReopt);
  $("#reopt-use-open").addEventListener("click", () => { if (state.candidate) fillReopt(state.candidate); else status("no design is open"); });
  $("#reopt-file").addEventListener("change", async (e) => { const f = e.target.files[0]; if (f) $("#reopt-text").value = await f.text(); });
  $("#registry-load").addEventListener("click", loadRegistry);
  $("#impact-run").addEventListener("click", runImpact);
  window.addEventListener("hashchange", () => show(location.hash.slice(1)));
  fillSpec(EXAMPLES.demo);
  show(location.hash.slice(1) || "spec");
}

start();
