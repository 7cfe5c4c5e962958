// Base camp desk: the coordinator's pages. Plain JavaScript module, no
// build step, online only (it talks to the camp server's API on every
// view). Numbers are shown as the server's estimators computed them; this
// file formats and draws, it never estimates. Text from records is put in
// the page with textContent, never as HTML.

import { barChart, bandChart, intervalChart } from "./plot.js";
import { api, changeHeaders, signIn, signedOut, viewAccess } from "./access.js";

const API = "/api/v1";
const state = { studies: [], study: "", view: "summary" };

// ---- small helpers ----

function h(tag, attrs = {}, ...kids) {
  const e = document.createElement(tag);
  for (const [k, v] of Object.entries(attrs)) {
    if (v === undefined || v === null || v === false) continue;
    if (k === "class") e.className = v;
    // Through the CSSOM: the server's CSP refuses inline style attributes.
    else if (k === "style") e.style.cssText = v;
    else if (k.startsWith("on")) e.addEventListener(k.slice(2), v);
    else if (k === "text") e.textContent = v;
    else e.setAttribute(k, v === true ? "" : String(v));
  }
  for (const k of kids.flat()) {
    if (k === null || k === undefined || k === false) continue;
    e.append(typeof k === "string" || typeof k === "number" ? document.createTextNode(String(k)) : k);
  }
  return e;
}

const sp = (id) => `/studies/${encodeURIComponent(id)}`;

function num(v, digits = 1) {
  if (v === null || v === undefined || !Number.isFinite(v)) return "–";
  return v.toLocaleString("en-GB", { minimumFractionDigits: digits, maximumFractionDigits: digits });
}

function ci(v, digits = 1) {
  if (!v || !Number.isFinite(v.ci_low) || !Number.isFinite(v.ci_high)) return "–";
  return `${num(v.ci_low, digits)} – ${num(v.ci_high, digits)}`;
}

function pct(x, digits = 0) {
  return Number.isFinite(x) ? `${num(100 * x, digits)} %` : "–";
}

function when(iso) {
  if (!iso) return "–";
  const d = new Date(iso);
  if (Number.isNaN(d.getTime()) || d.getUTCFullYear() < 1900) return "–";
  return d.toISOString().replace("T", " ").slice(0, 16) + " UTC";
}

function shortID(id) {
  return id ? id.slice(-8) : "";
}

function setStatus(text) {
  document.getElementById("status").textContent = text;
}

function main() {
  return document.getElementById("main");
}

function show(...nodes) {
  const m = main();
  m.replaceChildren(...nodes);
}

function failure(err) {
  return h("div", { class: "caution" }, h("p", {}, `Could not load this page: ${err.message}`),
    h("p", { class: "small" }, "The camp server may be unreachable. These pages work only while it answers."));
}

function assumptions(list, heading = "Assumptions") {
  if (!list || !list.length) return null;
  return h("div", {}, h("h3", {}, heading), h("ul", { class: "assume" }, list.map((a) => h("li", {}, a))));
}

// ---- study choice and navigation ----

async function loadStudies() {
  const { studies } = await api("/studies");
  state.studies = studies || [];
  const sel = document.getElementById("study");
  sel.replaceChildren(...state.studies.map((s) => h("option", { value: s.id }, `${s.name} (${s.design})`)));
  const want = new URLSearchParams(location.search).get("study") || localStorage.getItem("tagtally.coord.study");
  state.study = state.studies.some((s) => s.id === want) ? want : state.studies[0] ? state.studies[0].id : "";
  sel.value = state.study;
  sel.addEventListener("change", () => {
    state.study = sel.value;
    localStorage.setItem("tagtally.coord.study", state.study);
    route();
  });
}

const views = { summary: viewSummary, checks: viewChecks, conflicts: viewConflicts, devices: viewDevices, estimates: viewEstimates, transfer: viewTransfer, access: viewAccessPage };

function viewAccessPage() {
  const st = state.studies.find((s) => s.id === state.study);
  return viewAccess({ h, show, study: state.study, studyName: st ? st.name : state.study });
}

async function route() {
  const v = location.hash.replace("#", "") || "summary";
  state.view = views[v] ? v : "summary";
  for (const a of document.querySelectorAll(".side a")) a.classList.toggle("on", a.dataset.view === state.view);
  if (!state.study) {
    show(h("h1", {}, "No study yet"), h("p", {}, "Create a study first; its records, checks and estimates will appear here."));
    return;
  }
  show(h("p", { class: "muted" }, "Loading…"));
  delete main().dataset.shown;
  try {
    await views[state.view]();
  } catch (err) {
    show(failure(err));
  }
  // Tests and screen readers can tell when a view has finished loading.
  main().dataset.shown = state.view;
  await refreshCounts();
}

async function refreshCounts() {
  if (!state.study) return;
  try {
    const [c, k] = await Promise.all([api(sp(state.study) + "/checks"), api(sp(state.study) + "/conflicts")]);
    document.getElementById("n-checks").textContent = c.checks.length ? String(c.checks.length) : "";
    document.getElementById("n-conflicts").textContent = k.conflicts.length ? String(k.conflicts.length) : "";
    setStatus(`Checked ${new Date().toLocaleTimeString("en-GB")}`);
  } catch (err) {
    setStatus(`Server not answering: ${err.message}`);
  }
}

// ---- summary ----

function tile(k, v, sub) {
  return h("div", { class: "tile" }, h("div", { class: "k" }, k), h("div", { class: "v" }, v), sub ? h("div", { class: "s" }, sub) : null);
}

function perOccasionChart(rows) {
  return barChart({
    title: "Animals caught per occasion",
    labels: rows.map((r) => r.occasion),
    series: [
      { name: "already marked", values: rows.map((r) => r.marked), cls: "bar" },
      { name: "caught for the first time", values: rows.map((r) => r.new), cls: "bar2" },
    ],
    xTitle: "occasion",
    yTitle: "animals",
  });
}

function frequencyChart(f) {
  return barChart({
    title: "Capture frequencies",
    labels: f.f.map((_, i) => i + 1),
    series: [{ name: "animals", values: f.f, cls: "bar" }],
    xTitle: "times caught (occasions)",
    yTitle: "animals",
  });
}

function chartLegend() {
  return h("div", { class: "legend" },
    h("span", {}, h("i", { style: "background:#3d6b4f" }), "already marked"),
    h("span", {}, h("i", { style: "background:#9cb8a5" }), "caught for the first time"));
}

async function viewSummary() {
  const s = await api(sp(state.study) + "/summary");
  const sr = s.sex_ratio;
  const rr = s.recapture_rate;
  const nodes = [
    h("h1", {}, s.name),
    h("p", { class: "muted" }, `${s.design} design · ${s.occasions} occasions · ${s.stations} stations`),
  ];
  if (s.open_checks > 0) {
    nodes.push(h("div", { class: "caution" }, h("p", {}, `${s.open_checks} data ${s.open_checks === 1 ? "check is" : "checks are"} open. `,
      h("a", { href: "#checks" }, "Review the data checks"), " before relying on the numbers.")));
  }
  nodes.push(h("div", { class: "tiles" },
    tile("Animals caught", String(s.animals), "tag chains with a capture on an occasion"),
    tile("Captures", String(s.captures), "animal-occasions"),
    tile("Records", String(s.records), `${s.new_marks} new marks`),
    tile("Recaptured", rr ? pct(rr.proportion) : "–", rr ? `${s.recaptured} of ${s.animals} animals; 95% CI ${pct(rr.ci_low)} – ${pct(rr.ci_high)}` : "no animals yet"),
    tile("Sex ratio", sr ? `${num(sr.males_per_female, 2)} ♂ per ♀` : "–",
      sr ? `${sr.males} male, ${sr.females} female, ${sr.unknown} unknown; share male ${pct(sr.proportion_male.estimate)} (95% CI ${pct(sr.proportion_male.ci_low)} – ${pct(sr.proportion_male.ci_high)}); exact test of 1:1, p = ${num(sr.p, 3)}` : null),
    tile("Open data checks", String(s.open_checks), s.open_checks ? "see Data checks" : "none"),
  ));
  const plots = h("div", { class: "row" });
  if (s.per_occasion && s.per_occasion.length) plots.append(h("div", { class: "panel" }, perOccasionChart(s.per_occasion), chartLegend()));
  if (s.capture_frequencies) plots.append(h("div", { class: "panel" }, frequencyChart(s.capture_frequencies), h("p", { class: "small muted" }, `Mean ${num(s.capture_frequencies.mean_captures, 2)} captures per animal.`)));
  nodes.push(plots);
  if (s.age_structure) {
    const a = s.age_structure;
    nodes.push(h("h2", {}, "Age structure by occasion"),
      h("div", { class: "scroll" }, h("table", {},
        h("thead", {}, h("tr", {}, h("th", {}, "Occasion"), a.classes.map((c) => h("th", { class: "n" }, c)), h("th", { class: "n" }, "animals"))),
        h("tbody", {}, a.occasions.map((o, i) => h("tr", {}, h("td", {}, String(o)),
          a.counts[i].map((n, j) => h("td", { class: "n" }, `${n} (${pct(a.proportions[i][j].estimate)})`)),
          h("td", { class: "n" }, String(a.totals[i]))))))),
      assumptions(a.assumptions));
  }
  if (sr) nodes.push(assumptions(sr.assumptions, "Sex ratio assumes"));
  if (s.cautions || s.permit_ref) {
    nodes.push(h("h2", {}, "Study cautions"), h("div", { class: "caution calm" },
      s.cautions ? h("p", { style: "white-space: pre-line" }, s.cautions) : null,
      s.permit_ref ? h("p", {}, `Permit reference: ${s.permit_ref}`) : null));
  }
  show(...nodes);
}

// ---- data checks and the record editor ----

async function viewChecks() {
  const ans = await api(sp(state.study) + "/checks");
  const nodes = [h("h1", {}, "Data checks")];
  if (!ans.checks.length) {
    nodes.push(h("p", { class: "ok" }, "No problems found in the records."));
  } else {
    const affecting = ans.checks.filter((c) => c.affects_estimates).length;
    nodes.push(h("p", {}, `${ans.checks.length} ${ans.checks.length === 1 ? "problem" : "problems"} found; ${affecting} of them change the capture histories or covariates the estimates use. Open a record to correct it; the checks run again after every change.`));
  }
  for (const c of ans.checks) {
    nodes.push(h("section", { class: `check ${c.severity}`, "data-code": c.code },
      h("h3", {}, h("span", { class: `badge ${c.severity}` }, c.severity), " ", c.title,
        c.affects_estimates ? h("span", {}, " ", h("span", { class: "badge est", title: "changes what the estimators use" }, "affects estimates")) : null),
      h("p", {}, c.explanation),
      c.affects_estimates && c.effect ? h("p", { class: "effect" }, `Effect on estimates: ${c.effect}`) : null,
      h("p", { class: "advice" }, `What to do: ${c.advice}`),
      h("div", { class: "recs" }, c.capture_ids.map((id) => h("button", { type: "button", "data-capture": id, onclick: () => openEditor(id) }, `Open record …${shortID(id)}`))),
    ));
  }
  const clear = ans.kinds.filter((k) => !ans.counts[k.code]).map((k) => k.title.toLowerCase());
  if (clear.length) nodes.push(h("p", { class: "small muted" }, `Also checked, nothing found: ${clear.join("; ")}.`));
  show(...nodes);
}

const editable = [
  ["tag_id", "Tag", "text"],
  ["event", "Event", ["new", "recapture", "resight", "retag", "dead"]],
  ["old_tag_id", "Old tag (retag)", "text"],
  ["captured_at", "Captured at (UTC)", "datetime"],
  ["occasion_set_by_hand", "Occasion set by hand", "bool"],
  ["occasion", "Occasion", "int"],
  ["station_id", "Station", "text"],
  ["species", "Species", "text"],
  ["sex", "Sex", ["", "female", "male", "unknown"]],
  ["age", "Age class", ["", "juvenile", "subadult", "adult", "unknown"]],
  ["mass_g", "Mass (g)", "number"],
  ["fate", "Fate", ["", "released", "died", "removed"]],
  ["observer", "Observer", "text"],
  ["device", "Device", "text"],
  ["notes", "Notes", "textarea"],
];

let editing = null;

async function openEditor(id) {
  const dlg = document.getElementById("editor");
  const msg = document.getElementById("editor-msg");
  msg.textContent = "";
  let rec;
  try {
    rec = await api(`${sp(state.study)}/captures/${encodeURIComponent(id)}`);
  } catch (err) {
    alert(`Could not open the record: ${err.message}`);
    return;
  }
  editing = rec;
  document.getElementById("editor-title").textContent = `Record …${shortID(rec.id)}${rec.revision && rec.revision.deleted ? " (deleted)" : ""}`;
  const fields = document.getElementById("editor-fields");
  fields.replaceChildren();
  for (const [name, label, kind] of editable) {
    const v = rec[name];
    let input;
    if (Array.isArray(kind)) {
      input = h("select", { name }, kind.map((o) => h("option", { value: o, selected: (v || "") === o }, o || "(not given)")));
    } else if (kind === "textarea") {
      input = h("textarea", { name, rows: 2 });
      input.value = v || "";
    } else if (kind === "bool") {
      input = h("input", { name, type: "checkbox", checked: Boolean(v) });
    } else if (kind === "datetime") {
      input = h("input", { name, type: "text", placeholder: "2026-06-09T06:15:00Z" });
      input.value = v && !v.startsWith("0001") ? v : "";
    } else {
      input = h("input", { name, type: kind === "int" || kind === "number" ? "number" : "text", step: kind === "number" ? "any" : "1" });
      input.value = v === undefined || v === null ? "" : String(v);
    }
    fields.append(h("label", { for: `f-${name}` }, label), input);
    input.id = `f-${name}`;
  }
  dlg.showModal();
}

function editedRecord() {
  const out = { ...editing };
  const form = document.getElementById("editor-form");
  for (const [name, , kind] of editable) {
    const el = form.elements.namedItem(name);
    if (kind === "bool") out[name] = el.checked;
    else if (kind === "int") out[name] = el.value === "" ? 0 : parseInt(el.value, 10);
    else if (kind === "number") {
      if (el.value === "") delete out[name];
      else out[name] = Number(el.value);
    } else if (el.value === "") delete out[name];
    else out[name] = el.value;
  }
  if (!out.captured_at) out.captured_at = "0001-01-01T00:00:00Z";
  return out;
}

function wireEditor() {
  const dlg = document.getElementById("editor");
  const msg = document.getElementById("editor-msg");
  document.getElementById("editor-cancel").addEventListener("click", () => dlg.close());
  document.getElementById("editor-form").addEventListener("submit", async (ev) => {
    ev.preventDefault();
    msg.textContent = "Saving…";
    try {
      const ans = await api(`${sp(state.study)}/captures/${encodeURIComponent(editing.id)}`, { method: "PUT", body: JSON.stringify(editedRecord()) });
      const notes = (ans.findings || []).map((f) => f.message);
      dlg.close();
      setStatus(notes.length ? `Saved; note: ${notes.join("; ")}` : "Saved.");
      route();
    } catch (err) {
      msg.textContent = err.field ? `${err.field}: ${err.message}` : err.message;
    }
  });
  document.getElementById("editor-delete").addEventListener("click", async () => {
    if (!confirm("Mark this record deleted? It stays in the data file and can be reviewed, but leaves the capture histories.")) return;
    try {
      await api(`${sp(state.study)}/captures/${encodeURIComponent(editing.id)}`, { method: "DELETE" });
      dlg.close();
      setStatus("Record marked deleted.");
      route();
    } catch (err) {
      msg.textContent = err.message;
    }
  });
}

// ---- conflicts ----

const compared = ["tag_id", "old_tag_id", "event", "captured_at", "occasion", "station_id", "species", "sex", "age", "mass_g", "fate", "observer", "device", "notes", "measurements", "lat", "lon"];

function fieldLabel(f) {
  const e = editable.find(([name]) => name === f);
  if (e) return e[1];
  return { measurements: "Measurements", lat: "Latitude (°)", lon: "Longitude (°)" }[f] || f;
}

function shown(v) {
  if (v === undefined || v === null || v === "") return "—";
  if (typeof v === "object") return JSON.stringify(v);
  return String(v);
}

async function resolve(row, body, deleted) {
  const leaves = row.leaves.map((l) => l.revision.id);
  const b = { ...body };
  delete b.revision;
  await api(`${sp(state.study)}/captures/${encodeURIComponent(row.capture.id)}/resolve`, {
    method: "POST",
    body: JSON.stringify({ leaves, capture: b, deleted: Boolean(deleted) }),
  });
}

function conflictCard(row) {
  const picks = {};
  const winner = row.leaves.findIndex((l) => l.revision.id === row.winner);
  const msg = h("p", { class: "msg", role: "alert" });
  const table = h("table", { class: "diff" });
  const head = h("tr", {}, h("th", {}, "Field"), row.leaves.map((l, i) => h("th", {},
    `Version ${i + 1}`, h("br"), h("span", { class: "small" }, `${l.revision.device || "unknown device"}, written ${when(stampTime(l.revision.stamp))}`),
    i === winner ? h("div", { class: "small" }, h("span", { class: "badge caution" }, "provisional"), " used until you choose") : null,
    l.revision.deleted ? h("div", { class: "small" }, h("span", { class: "badge problem" }, "deleted version")) : null)));
  table.append(h("thead", {}, head));
  const body = h("tbody");
  for (const f of compared) {
    const vals = row.leaves.map((l) => shown(l[f]));
    const differs = new Set(vals).size > 1;
    if (!differs && vals[0] === "—") continue;
    const tr = h("tr", { class: differs ? "differs" : "", "data-field": f }, h("td", {}, fieldLabel(f)));
    row.leaves.forEach((l, i) => {
      if (!differs) {
        tr.append(h("td", {}, vals[i]));
        return;
      }
      picks[f] = winner;
      const radio = h("input", { type: "radio", name: `${row.capture.id}-${f}`, value: String(i), checked: i === winner, onchange: () => { picks[f] = i; } });
      tr.append(h("td", { class: "pick" }, h("label", {}, radio, vals[i])));
    });
    body.append(tr);
  }
  table.append(body);
  const buttons = h("div", { class: "actions" },
    row.leaves.map((l, i) => h("button", {
      type: "button",
      class: "primary",
      "data-keep": String(i),
      onclick: async () => {
        msg.textContent = "Saving…";
        try {
          await resolve(row, l, l.revision.deleted);
          setStatus(`Conflict on …${shortID(row.capture.id)} resolved: version ${i + 1} kept; the others stay in the record's history.`);
          route();
        } catch (err) {
          msg.textContent = err.message;
        }
      },
    }, `Keep version ${i + 1}`)),
    h("span", { class: "grow" }),
    h("button", {
      type: "button",
      onclick: async () => {
        const merged = { ...row.leaves[winner] };
        for (const [f, i] of Object.entries(picks)) {
          if (row.leaves[i][f] === undefined) delete merged[f];
          else merged[f] = row.leaves[i][f];
        }
        msg.textContent = "Saving…";
        try {
          await resolve(row, merged, false);
          setStatus(`Conflict on …${shortID(row.capture.id)} resolved with a merged version.`);
          route();
        } catch (err) {
          msg.textContent = err.message;
        }
      },
    }, "Save merged version (the ticked values)"));
  return h("section", { class: "panel", "data-conflict": row.capture.id, style: "margin: 0.75rem 0" },
    h("h2", {}, `Tag ${row.capture.tag_id}, ${row.capture.event}, ${when(row.capture.captured_at)}`),
    h("p", { class: "small muted" }, `Record …${shortID(row.capture.id)}: ${row.leaves.length} versions were edited without seeing each other. Rows shaded differ; tick the value to keep in each, or keep one version whole. Nothing is lost: every version stays in the record's history.`),
    h("div", { class: "scroll" }, table), buttons, msg);
}

// stampTime reads the wall-clock milliseconds at the start of a revision
// stamp (12 hex digits), for display only.
function stampTime(stamp) {
  if (!stamp || stamp.length < 12) return null;
  const ms = parseInt(stamp.slice(0, 12), 16);
  return Number.isFinite(ms) ? new Date(ms).toISOString() : null;
}

async function viewConflicts() {
  const ans = await api(sp(state.study) + "/conflicts");
  const nodes = [h("h1", {}, "Conflicts")];
  if (!ans.conflicts.length) {
    nodes.push(h("p", { class: "ok" }, "No record has conflicting versions."));
  } else {
    nodes.push(h("p", {}, `${ans.conflicts.length} ${ans.conflicts.length === 1 ? "record was" : "records were"} edited on two devices at once. Until you choose, the provisional version is used everywhere, estimates included.`));
    for (const row of ans.conflicts) nodes.push(conflictCard(row));
  }
  show(...nodes);
}

// ---- devices ----

async function viewDevices() {
  const ans = await api(sp(state.study) + "/devices");
  const rows = ans.devices.map((d) => h("tr", {},
    h("td", {}, d.device || "(no device named)"),
    h("td", {}, d.observers.join(", ") || "—"),
    h("td", { class: "n" }, String(d.records)),
    h("td", { class: "n" }, String(d.deleted)),
    h("td", {}, when(d.first_capture)),
    h("td", {}, when(d.last_capture)),
    h("td", {}, when(d.last_written)),
    h("td", {}, d.last_push ? `${when(d.last_push)} (${d.pushed_stored} stored, ${d.pushed_rejected} refused)` : "never pushed here"),
    h("td", { class: "n" }, d.conflicts ? h("a", { href: "#conflicts" }, String(d.conflicts)) : "0")));
  show(h("h1", {}, "Devices"),
    h("p", { class: "muted" }, "Every device named on the study's records. \"Last push\" is when the device last sent records to this server; records loaded from a file or the demo were never pushed. A device whose latest capture is old may still hold unsent records: ask its crew to open the app near camp."),
    h("div", { class: "scroll" }, h("table", {},
      h("thead", {}, h("tr", {}, ["Device", "Observers", "Records", "Deleted", "First capture", "Last capture", "Last version written", "Last push", "Conflicts"].map((t, i) => h("th", { class: [2, 3, 8].includes(i) ? "n" : "" }, t)))),
      h("tbody", {}, rows))));
}

// ---- estimates ----

function valueCells(v, digits) {
  if (!v) return [h("td", { class: "n" }, "–"), h("td", { class: "n" }, "–"), h("td", { class: "n" }, "–")];
  return [h("td", { class: "n" }, num(v.estimate, digits)), h("td", { class: "n" }, num(v.se, digits)), h("td", { class: "n nowrap" }, ci(v, digits))];
}

function cautionBox(ans) {
  const box = h("div", { class: ans.checks.length ? "caution split" : "caution calm", id: "estimate-cautions" });
  box.append(h("ul", {}, ans.cautions.map((c) => h("li", {}, c))));
  if (ans.checks.length) {
    box.append(h("div", {}, h("strong", {}, "Data checks affecting these estimates:"),
      h("ul", {}, ans.checks.map((c) => h("li", {}, h("a", { href: "#checks" }, c.title), ": ", c.explanation)))));
  }
  return box;
}

// intervalKeys gives each interval method a letter, so the table can name
// the method of every interval without a wide column.
function intervalKeys(values) {
  const keys = new Map();
  for (const v of values) {
    if (v && v.ci_kind && !keys.has(v.ci_kind)) keys.set(v.ci_kind, "abcdefghij"[keys.size] || "*");
  }
  return keys;
}

function closedSection(rep) {
  const t = rep.closed;
  const nodes = [];
  const keys = intervalKeys([...t.rows.map((r) => r.result && r.result.N), t.averaged_N, t.conditional_averaged_N]);
  const nCells = (v) => v
    ? [h("td", { class: "n" }, num(v.estimate, 1)), h("td", { class: "n" }, num(v.se, 1)), h("td", { class: "n nowrap" }, ci(v, 1), h("sup", { title: v.ci_kind }, keys.get(v.ci_kind) || ""))]
    : [h("td", { class: "n" }, "–"), h("td", { class: "n" }, "–"), h("td", { class: "n" }, "–")];
  const body = h("tbody");
  let family = "";
  for (const r of t.rows) {
    if (r.family !== family) {
      family = r.family;
      body.append(h("tr", { class: "group" }, h("td", { colspan: 7 }, family)));
    }
    const res = r.result;
    const failed = !res || !res.N;
    const best = r.ranked && !r.delta && !failed;
    body.append(h("tr", { class: failed ? "failed" : best ? "best" : "" },
      h("td", {}, r.name, failed && r.error ? h("div", { class: "small" }, `not estimated: ${r.error}`) : null),
      ...nCells(res && res.N),
      h("td", { class: "n" }, r.ranked ? num(r.criterion, 2) : "–"),
      h("td", { class: "n" }, r.ranked ? num(r.delta || 0, 2) : "–"),
      h("td", { class: "n" }, r.ranked ? num(r.weight || 0, 3) : "–")));
  }
  for (const [label, v] of [["Model-averaged N, full likelihood", t.averaged_N], ["Model-averaged N, conditional likelihood", t.conditional_averaged_N]]) {
    if (v) body.append(h("tr", { class: "avg" }, h("td", {}, label), ...nCells(v), h("td", { colspan: 3 })));
  }
  const table = h("div", { class: "panel" },
    h("div", { class: "scroll" }, h("table", { id: "model-table", class: "dense" },
      h("thead", {}, h("tr", {}, ["Model", "N", "SE", "95% CI", t.criterion_name, `Δ${t.criterion_name}`, "Weight"].map((x, i) => h("th", { class: i ? "n" : "" }, x)))),
      body)),
    h("p", { class: "small muted" }, "Intervals: ", [...keys].map(([kind, k], i) => `${i ? "; " : ""}${k} ${kind}`).join(""), "."));
  const plotRows = t.rows.filter((r) => r.result && r.result.N).map((r) => ({
    label: r.name, est: r.result.N.estimate, low: r.result.N.ci_low, high: r.result.N.ci_high, best: r.ranked && !r.delta,
  }));
  if (t.averaged_N) plotRows.unshift({ label: "model average", est: t.averaged_N.estimate, low: t.averaged_N.ci_low, high: t.averaged_N.ci_high, best: true });
  const plotPanel = h("div", { class: "panel" },
    intervalChart({ title: "N with 95% interval by model", rows: plotRows, xTitle: "animals (N)", ref: t.averaged_N ? { value: t.averaged_N.estimate } : null, floor: t.animals, width: 440, rowH: 19, labelW: 178 }),
    h("p", { class: "small muted" }, `Dashed red line: model-averaged N. Dotted line: the ${t.animals} animals caught, the least N can be.`));
  nodes.push(h("h2", {}, "Closed-population models: population size N"));
  if (t.averaged_N) {
    const a = t.averaged_N;
    nodes.push(h("p", { class: "headline", id: "averaged-n" }, "Model-averaged N: ", h("strong", {}, num(a.estimate, 1)), ` animals (SE ${num(a.se, 1)}; 95% CI ${ci(a, 1)}, ${a.ci_kind}).`));
  }
  nodes.push(
    h("p", { class: "small muted" }, `${t.animals} animals, ${t.occasions} occasions, ${t.captures} captures (animal-occasions). N is the number of animals exposed to the traps. Within each family, models are ranked by ${t.criterion_name} (lower is better; the weight is the model's share of support); estimators without a likelihood are shown for comparison.`),
    h("div", { class: "row wide-left" }, table, plotPanel));
  const top = t.rows.find((r) => r.result && r.result.N && r.ranked);
  nodes.push(h("div", { class: "panel" },
    top ? assumptions(top.result.assumptions, `Assumptions of the best-supported model (${top.name}), in plain words`) : null,
    top && top.result.warnings ? assumptions(top.result.warnings, "Warnings") : null,
    h("details", {}, h("summary", {}, "Assumptions and warnings of every model"),
      t.rows.filter((r) => r.result).map((r) => h("div", {}, h("h3", {}, r.name), h("ul", { class: "assume" }, (r.result.assumptions || []).map((a) => h("li", {}, a)), (r.result.warnings || []).map((a) => h("li", {}, `Warning: ${a}`))))))));
  if (rep.density) {
    const d = rep.density;
    nodes.push(h("h2", {}, "Density"),
      h("p", {}, `${num(d.density_per_ha.estimate, 1)} animals per hectare (SE ${num(d.density_per_ha.se, 1)}; 95% CI ${ci(d.density_per_ha, 1)}), from N over an effective area of ${num(d.effective_area_ha.estimate, 2)} ha: the ${num(d.grid_area_ha, 2)} ha grid plus a strip ${num(d.strip_width_m.estimate, 1)} m wide (${d.strip}).`),
      assumptions(d.assumptions, "Density assumes"));
  }
  return nodes;
}

// How animals spread over the stations: the numbers come from the
// server's report (estimators/spatial); this only lays them out.
function spreadSection(d, nn) {
  const p = (x) => (x < 0.001 ? "< 0.001" : num(x, 3));
  const rows = [];
  if (d) {
    const vm = d.variance_mean;
    const mo = d.morisita;
    rows.push(["Variance-to-mean ratio", num(vm.ratio, 2), `chi-square ${num(vm.test.statistic, 1)} on ${vm.test.df} df, p ${p(vm.test.p)}`, vm.test.pattern]);
    rows.push(["Morisita's index", num(mo.index, 2), `p ${p(mo.test.p)}`, mo.test.pattern]);
    rows.push(["Standardized Morisita index", num(mo.standardized, 2), "beyond ±0.5 departs from random", mo.standardized_pattern]);
  }
  if (nn) rows.push(["Clark-Evans ratio R", num(nn.R, 2), `z ${num(nn.test.statistic, 2)}, p ${p(nn.test.p)}; ${nn.points} positions`, nn.test.pattern]);
  const nodes = [h("h2", {}, "How animals spread over the stations"),
    h("p", { class: "small muted" }, d ? `Each animal counted once, at the station of its first capture: ${d.variance_mean.total} animals over ${d.variance_mean.stations} stations.` : ""),
    h("table", { id: "spread-table", class: "dense" },
      h("thead", {}, h("tr", {}, ["Index", "Value", "Test", "Reading"].map((x) => h("th", {}, x)))),
      h("tbody", {}, rows.map((r) => h("tr", {}, r.map((x) => h("td", {}, x))))))];
  if (d) nodes.push(assumptions(d.assumptions, "These indices assume"));
  if (nn) nodes.push(assumptions(nn.assumptions, "The nearest-neighbour test assumes"));
  return nodes;
}

// ---- export and import ----

const tables = [
  ["histories", "Capture histories (id, history, covariates) for other analysis tools"],
  ["captures", "Every capture record"],
  ["individuals", "One row per animal"],
  ["occasions", "Per-occasion counts and the m-array"],
  ["summary", "Summary"],
  ["checks", "Open data-check findings"],
];

async function viewTransfer() {
  const base = `${API}${sp(state.study)}`;
  const report = h("div", { id: "import-report" });
  const file = h("input", { type: "file", id: "import-file", accept: ".csv,.xlsx,.json,text/csv" });
  const mapping = h("input", { type: "file", id: "import-mapping", accept: ".csv,text/csv" });
  const send = async (dry) => {
    if (!file.files.length) {
      report.replaceChildren(h("p", { class: "msg" }, "Choose a file first."));
      return;
    }
    const form = new FormData();
    form.append("file", file.files[0]);
    if (mapping.files.length) form.append("mapping", mapping.files[0]);
    report.replaceChildren(h("p", { class: "muted" }, dry ? "Checking…" : "Importing…"));
    const res = await fetch(`${base}/import?dry_run=${dry}`, { method: "POST", body: form, headers: { Accept: "application/json", ...changeHeaders() } });
    let body = null;
    try {
      body = await res.json();
    } catch {
      body = null;
    }
    const rep = body && body.report;
    if (!rep) {
      report.replaceChildren(h("p", { class: "msg" }, (body && body.error) || `The server answered ${res.status}.`));
      return;
    }
    const lines = (rep.problems || []).map((p) => h("tr", {}, h("td", { class: "n" }, p.row ? String(p.row) : "file"), h("td", {}, p.column || ""), h("td", {}, p.value || ""), h("td", {}, p.reason)));
    report.replaceChildren(
      h("p", { class: rep.problems && rep.problems.length ? "msg" : "" },
        rep.problems && rep.problems.length ? `${rep.problems.length} problem${rep.problems.length === 1 ? "" : "s"}: nothing was imported. Correct the rows below and try again.`
          : dry ? `${rep.valid} of ${rep.rows} rows are ready to import. Nothing was written yet.` : `Imported ${rep.written} records.`),
      lines.length ? h("table", { class: "dense", id: "import-problems" }, h("thead", {}, h("tr", {}, ["Row", "Column", "Value", "What is wrong"].map((x) => h("th", {}, x)))), h("tbody", {}, lines)) : null,
      (rep.notes || []).length ? assumptions(rep.notes.map((n) => (n.row ? `Row ${n.row}: ` : "") + n.reason), "Notes") : null);
  };
  show(
    h("h1", {}, "Export and import"),
    h("h2", {}, "For the program office"),
    h("p", {}, h("a", { class: "button primary", href: `${base}/export.xlsx`, id: "export-xlsx" }, "Download the workbook (XLSX)")),
    h("p", { class: "small muted" }, "One workbook: summary with the headline estimates, cautions and assumptions; every record; animals; occasions and m-array; model tables; demography, density and dispersion; open data checks. Estimates from data with open checks should be read as provisional."),
    h("h3", {}, "Single tables as CSV"),
    h("ul", {}, tables.map(([t, what]) => h("li", {}, h("a", { href: `${base}/export/${t}.csv` }, `${t}.csv`), ` · ${what}`))),
    h("h2", {}, "Import older data or a phone's backup file"),
    h("p", { class: "small muted" }, "CSV, XLSX (the sheet named Captures, or the first) or a phone outbox backup. Headers are matched whatever their case; for others add a mapping file of lines \"file column,field\". Every row is checked first; if any row has a problem nothing is written. Importing the same file twice adds nothing."),
    h("div", { class: "fields" }, h("label", {}, "File ", file), h("label", {}, "Mapping file (optional) ", mapping)),
    h("p", {}, h("button", { type: "button", onclick: () => send(true) }, "Check the file"), " ", h("button", { type: "button", class: "primary", onclick: () => send(false) }, "Import")),
    report);
}

function jsSection(js) {
  const occ = js.occasions;
  const cell = (v, d) => valueCells(v, d);
  const nodes = [h("h2", {}, "Jolly-Seber estimates by occasion"),
    h("p", { class: "small muted" }, `${js.method}. N: animals alive in the area at the occasion; φ (phi): probability of surviving and staying from one occasion to the next; B: animals joining between this occasion and the next; p: capture probability.`),
    h("div", { class: "scroll" }, h("table", { id: "js-table", class: "dense" },
      h("thead", {}, h("tr", {}, ["Occasion", "n", "m", "R", "N", "SE", "95% CI", "φ", "SE", "95% CI", "B", "SE", "95% CI", "p", "SE", "95% CI"].map((x, i) => h("th", { class: i ? "n" : "" }, x)))),
      h("tbody", {}, occ.map((o) => h("tr", {}, h("td", {}, String(o.occasion)), h("td", { class: "n" }, String(o.n)), h("td", { class: "n" }, String(o.m)), h("td", { class: "n" }, String(o.R)),
        ...cell(o.N, 1), ...cell(o.phi, 3), ...cell(o.B, 1), ...cell(o.p, 3))))))];
  const series = (key) => [{ name: key, points: occ.filter((o) => o[key]).map((o) => ({ x: o.occasion, est: o[key].estimate, low: o[key].ci_low, high: o[key].ci_high })) }];
  const xs = occ.map((o) => o.occasion);
  nodes.push(h("div", { class: "row" },
    h("div", { class: "panel" }, bandChart({ title: "Abundance N by occasion (95% band)", series: series("N"), xTitle: "occasion", yTitle: "animals", xTicks: xs })),
    h("div", { class: "panel" }, bandChart({ title: "Survival φ to the next occasion (95% band)", series: series("phi"), xTitle: "occasion", yTitle: "probability", yRange: [0, 1], xTicks: xs }))));
  if (js.warnings && js.warnings.length) nodes.push(assumptions(js.warnings, "Warnings"));
  nodes.push(assumptions(js.assumptions, "Jolly-Seber assumes"));
  return nodes;
}

// parseParam splits "phi(female)[3]" into kind, group and occasion for
// placing averaged CJS parameters on a plot.
function parseParam(name) {
  const m = /^(phi|p)(?:\(([^)]*)\))?\[(\d+)\]$/.exec(name);
  return m ? { kind: m[1], group: m[2] || "all animals", i: Number(m[3]) } : null;
}

function cjsSection(cjs, gof) {
  const nodes = [h("h2", {}, "Survival models (Cormack-Jolly-Seber)"),
    h("p", { class: "small muted" }, `Fitted to the marked animals only. φ(.) means constant, φ(t) by interval, φ(g) by group${cjs.groups && cjs.groups.length > 1 ? ` (${cjs.groups.join(", ")})` : ""}. Ranked by ${cjs.criterion_name}${cjs.c_hat > 1 ? ` with c-hat ${num(cjs.c_hat, 2)}` : ""}.`),
    h("div", { class: "scroll" }, h("table", { id: "cjs-table" },
      h("thead", {}, h("tr", {}, ["Model", "Parameters", "log-likelihood", cjs.criterion_name, `Δ${cjs.criterion_name}`, "Weight"].map((x, i) => h("th", { class: i ? "n" : "" }, x)))),
      h("tbody", {}, cjs.rows.map((r, i) => h("tr", { class: i === 0 ? "best" : "" }, h("td", {}, r.result.method), h("td", { class: "n" }, String(r.result.params)),
        h("td", { class: "n" }, num(r.result.loglik, 2)), h("td", { class: "n" }, num(r.criterion, 2)), h("td", { class: "n" }, num(r.delta || 0, 2)), h("td", { class: "n" }, num(r.weight || 0, 3))))))),
  ];
  if (cjs.failed && cjs.failed.length) nodes.push(assumptions(cjs.failed, "Models that could not be fitted"));
  const groups = {};
  for (const a of cjs.averaged || []) {
    const p = parseParam(a.name);
    if (!p) continue;
    const key = `${p.kind}|${p.group}`;
    (groups[key] = groups[key] || { kind: p.kind, group: p.group, points: [] }).points.push({ x: p.i, est: a.estimate, low: a.ci_low, high: a.ci_high });
  }
  const phi = Object.values(groups).filter((g) => g.kind === "phi").map((g) => ({ name: g.group, points: g.points }));
  const p = Object.values(groups).filter((g) => g.kind === "p").map((g) => ({ name: g.group, points: g.points }));
  const legend = (ser) => h("div", { class: "legend" }, ser.map((se, k) => h("span", {}, h("i", { style: `background:${["#2f5d86", "#a3401f", "#3d6b4f"][k % 3]}` }), se.name)));
  if (phi.length || p.length) {
    nodes.push(h("div", { class: "row" },
      phi.length ? h("div", { class: "panel" }, bandChart({ title: "Model-averaged survival φ by interval", series: phi, xTitle: "interval starting at occasion", yTitle: "probability", yRange: [0, 1] }), legend(phi)) : null,
      p.length ? h("div", { class: "panel" }, bandChart({ title: "Model-averaged capture probability p", series: p, xTitle: "occasion", yTitle: "probability", yRange: [0, 1] }), legend(p)) : null));
  }
  if (cjs.warnings && cjs.warnings.length) nodes.push(assumptions(cjs.warnings, "Warnings"));
  if (gof && gof.Overall) {
    nodes.push(h("h3", {}, "Goodness of fit"),
      h("p", {}, `${gof.Overall.name}: χ² = ${num(gof.Overall.chi_square, 2)} on ${gof.Overall.df} degrees of freedom, p = ${num(gof.Overall.p, 3)}. ${gof.recommendation || ""}`));
  }
  if (cjs.rows[0]) nodes.push(assumptions(cjs.rows[0].result.assumptions, "Survival models assume"));
  return nodes;
}

function robustSection(rb) {
  const nodes = [h("h2", {}, "Robust design by primary period"), h("p", { class: "small muted" }, rb.method),
    h("div", { class: "scroll" }, h("table", { id: "robust-table", class: "dense" },
      h("thead", {}, h("tr", {}, ["Primary", "Caught", "N", "SE", "95% CI", "φ to next", "SE", "95% CI", "B", "SE", "95% CI"].map((x, i) => h("th", { class: i ? "n" : "" }, x)))),
      h("tbody", {}, rb.primaries.map((p) => h("tr", {}, h("td", {}, String(p.primary)), h("td", { class: "n" }, String(p.caught)), ...valueCells(p.N, 1), ...valueCells(p.phi, 3), ...valueCells(p.B, 1))))))];
  const ns = rb.primaries.filter((p) => p.N).map((p) => ({ x: p.primary, est: p.N.estimate, low: p.N.ci_low, high: p.N.ci_high }));
  const phis = rb.primaries.filter((p) => p.phi).map((p) => ({ x: p.primary, est: p.phi.estimate, low: p.phi.ci_low, high: p.phi.ci_high }));
  nodes.push(h("div", { class: "row" },
    ns.length ? h("div", { class: "panel" }, bandChart({ title: "Abundance N by primary period (95% band)", series: [{ name: "N", points: ns }], xTitle: "primary period", yTitle: "animals" })) : null,
    phis.length ? h("div", { class: "panel" }, bandChart({ title: "Survival φ between primaries (95% band)", series: [{ name: "φ", points: phis }], xTitle: "primary period", yTitle: "probability", yRange: [0, 1] })) : null));
  if (rb.warnings && rb.warnings.length) nodes.push(assumptions(rb.warnings, "Warnings"));
  nodes.push(assumptions(rb.assumptions, "The robust design assumes"));
  return nodes;
}

async function viewEstimates() {
  show(h("h1", {}, "Estimates"), h("p", { class: "muted" }, "Computing…"));
  const ans = await api(sp(state.study) + "/estimates");
  const rep = ans.report;
  const nodes = [h("h1", {}, `Estimates · ${rep.design} design`),
    h("p", { class: "muted" }, `${rep.study_name}: ${rep.animals} animals caught on ${rep.occasions.length} occasions.`),
    cautionBox(ans)];
  if (rep.closed) nodes.push(...closedSection(rep));
  if (rep.jolly_seber) nodes.push(...jsSection(rep.jolly_seber));
  if (rep.cjs) nodes.push(...cjsSection(rep.cjs, rep.gof));
  if (rep.robust) nodes.push(...robustSection(rep.robust));
  if (rep.dispersion || rep.nearest_neighbour) nodes.push(...spreadSection(rep.dispersion, rep.nearest_neighbour));
  const data = h("div", { class: "row" });
  if (rep.summary && rep.summary.length) data.append(h("div", { class: "panel" }, perOccasionChart(rep.summary), chartLegend()));
  if (rep.capture_frequencies) data.append(h("div", { class: "panel" }, frequencyChart(rep.capture_frequencies)));
  nodes.push(h("h2", {}, "The data behind the estimates"), data);
  if (rep.notes && rep.notes.length) nodes.push(assumptions(rep.notes, "Notes from building the capture histories"));
  show(...nodes);
}

// ---- start ----

async function start() {
  wireEditor();
  try {
    if (!(await signIn())) {
      show(...signedOut(h));
      main().dataset.shown = "signed-out";
      return;
    }
    window.addEventListener("hashchange", route);
    await loadStudies();
  } catch (err) {
    show(failure(err));
    return;
  }
  await route();
}

start();
