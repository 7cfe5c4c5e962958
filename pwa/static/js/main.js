// The field log: wiring between the screens, the phone's storage and the
// camp server. Storage and sync rules live in db.js, outbox.js and
// sync.js; tag logic in tags.js.

import * as db from "./db.js";
import * as server from "./sync.js";
import { enqueue } from "./outbox.js";
import { buildTagIndex, lookupTag, suggestTags, eventFor, normaliseTag, tagProblems } from "./tags.js";
import { uuidv7 } from "./uuid.js";
import { nearestStations, formatWhen, formatLast } from "./view.js";
import * as enrol from "./enrol.js";

const $ = (id) => document.getElementById(id);
const DRAFT_KEY = "tagtally-draft";
const SYNC_EVERY_MS = 60_000;

const state = {
  device: null,
  observer: "",
  study: null,
  captures: [],
  index: buildTagIndex([]),
  editing: null, // capture being edited, or null for a new record
  position: null, // last GPS fix {lat, lon, accuracy}
  syncing: false,
  syncAsked: false, // "Sync now" was pressed during the running attempt
};

// ---------- start-up ----------

async function start() {
  registerServiceWorker();
  wireNavigation();
  wireForm();
  wireOutbox();
  await checkStorage();
  state.device = (await db.getMeta("device")) || null;
  if (!state.device) {
    state.device = "phone-" + uuidv7().slice(-12);
    await db.setMeta("device", state.device);
  }
  state.observer = (await db.getMeta("observer")) || "";
  $("observer").value = state.observer;
  const study = await db.getMeta("study");
  const code = enrol.codeFromAddress();
  if (code || !(await enrol.hasToken())) {
    // Joining needs the server; a phone with a study keeps recording
    // offline meanwhile, so the join step comes first only without one.
    if (code || !study) showEnrol(code);
    else await useStudy(study, false);
  } else if (study) {
    await useStudy(study, false);
  } else {
    await showJoin();
  }
  syncSoon();
  document.addEventListener("visibilitychange", () => {
    if (document.visibilityState === "visible") syncSoon();
  });
  window.addEventListener("online", syncSoon);
  // A join link opened while the app is already open changes only the
  // address's #fragment, which reloads nothing: take the code from it.
  window.addEventListener("hashchange", () => {
    const newCode = enrol.codeFromAddress();
    if (newCode) showEnrol(newCode);
  });
  setInterval(syncSoon, SYNC_EVERY_MS);
}

// The service worker keeps the app's files on the phone, which is what
// lets the app open with no network. Until the browser has an active
// worker for the app the crew is told plainly (offline-banner), so nobody
// walks out of Wi-Fi range with an app that will not open there.
function registerServiceWorker() {
  if (!("serviceWorker" in navigator)) {
    showOfflineState();
    return;
  }
  navigator.serviceWorker.addEventListener("controllerchange", showOfflineState);
  navigator.serviceWorker.ready.then(showOfflineState);
  navigator.serviceWorker
    .register("/sw.js")
    .catch((e) => console.warn("service worker not registered:", e))
    .finally(showOfflineState);
}

// The app is ready to open with no network once the browser has an active
// worker for it (it serves the next opening), whether or not this page is
// controlled by it yet.
async function showOfflineState() {
  const supported = "serviceWorker" in navigator;
  let ready = false;
  if (supported) {
    const r = await navigator.serviceWorker.getRegistration().catch(() => null);
    ready = Boolean(r && r.active);
    // A page that loaded while the worker was activating is left out of
    // the worker's claim (it ran before the page could be claimed) and
    // stays uncontrolled until reopened: ask the worker to claim it now.
    if (r && r.active && !navigator.serviceWorker.controller) r.active.postMessage("claim");
    if (r && r.installing) r.installing.addEventListener("statechange", showOfflineState, { once: true });
  }
  $("offline-banner").hidden = ready;
  if (!supported) {
    // Browsers keep an app for use offline only when it comes over HTTPS
    // (or from the laptop itself): waiting will not help here.
    $("offline-banner").textContent =
      "This app cannot work without a network when opened at this address. Open it from the camp server's https address (ask the coordinator for the setup page).";
  }
  $("offline-state").textContent = ready
    ? "yes: the app opens and records with no network"
    : supported
      ? "not yet: keep the app open on the camp Wi-Fi"
      : "no: open the app from the camp server's https address (see its setup page)";
}

// checkForNewBuild asks the camp server for a newer service worker, that
// is a newer build of the app. Browsers look for one when a page is
// opened, but a crew may keep the app open all day, so it also asks
// whenever it reaches the server; the new build takes over the next time
// the app is opened. If the first install failed (one file did not load
// on a weak link), the browser has dropped the registration and would not
// try again until the app is reopened: register it again now.
function checkForNewBuild() {
  if (!("serviceWorker" in navigator)) return;
  navigator.serviceWorker
    .getRegistration()
    .then((r) => (r && (r.active || r.installing || r.waiting) ? r.update() : navigator.serviceWorker.register("/sw.js")))
    .catch(() => {})
    .finally(showOfflineState);
}

// ---------- storage safety ----------

// A marker is written to IndexedDB, localStorage and the service worker's
// cache. If the others remain but IndexedDB's is gone, the browser cleared
// the records: say so plainly.
async function checkStorage() {
  const inDB = await db.getMeta("marker");
  let elsewhere = false;
  try {
    elsewhere = localStorage.getItem("tagtally-marker") === "1";
  } catch {}
  if ("caches" in window) {
    try {
      elsewhere = elsewhere || Boolean(await caches.match("/__tagtally-marker"));
    } catch {}
  }
  if (!inDB && elsewhere) $("vanished-banner").hidden = false;
  await db.setMeta("marker", Date.now());
  try {
    localStorage.setItem("tagtally-marker", "1");
  } catch {}
  if ("caches" in window) {
    try {
      const c = await caches.open("tagtally-marker");
      await c.put("/__tagtally-marker", new Response("1"));
    } catch {}
  }
  let persisted = false;
  if (navigator.storage && navigator.storage.persist) {
    persisted = (await navigator.storage.persisted()) || (await navigator.storage.persist());
  }
  $("persisted").textContent = persisted
    ? "yes: the browser will not clear it to free space"
    : "no: the browser may clear it; add the app to the home screen and sync often";
  // The banner takes room above the form, so the crew may put it away
  // until the app is next opened; the Outbox screen still says it.
  let putAway = false;
  try {
    putAway = sessionStorage.getItem("tagtally-evict-seen") === "1";
  } catch {}
  $("evict-banner").hidden = persisted || putAway;
  if (navigator.storage && navigator.storage.estimate) {
    const { usage, quota } = await navigator.storage.estimate();
    $("usage").textContent = `${formatBytes(usage)} of ${formatBytes(quota)} allowed`;
  } else {
    $("usage").textContent = "not reported by this browser";
  }
}

function formatBytes(n) {
  if (!Number.isFinite(n)) return "unknown";
  if (n < 1024 * 1024) return `${(n / 1024).toFixed(0)} kB`;
  if (n < 1024 * 1024 * 1024) return `${(n / 1024 / 1024).toFixed(1)} MB`;
  return `${(n / 1024 / 1024 / 1024).toFixed(1)} GB`;
}

// ---------- screens ----------

function show(name) {
  for (const s of document.querySelectorAll(".screen")) s.hidden = s.id !== `screen-${name}`;
  for (const b of document.querySelectorAll(".tabs button")) {
    if (b.dataset.go === name) b.setAttribute("aria-current", "page");
    else b.removeAttribute("aria-current");
  }
  if (name === "today") renderToday();
  if (name === "outbox") renderOutbox();
  window.scrollTo(0, 0);
}

function wireNavigation() {
  for (const b of document.querySelectorAll("[data-go]")) {
    b.addEventListener("click", () => {
      if (!state.study) return showJoin();
      show(b.dataset.go);
    });
  }
}

async function showJoin() {
  show("join");
  const list = $("study-list");
  list.textContent = "Asking the camp server…";
  $("join-error").textContent = "";
  try {
    const studies = await server.listStudies();
    list.textContent = "";
    const items = Array.isArray(studies) ? studies : studies.studies || [];
    if (items.length === 0) list.textContent = "The camp server has no studies yet. Ask your coordinator.";
    for (const s of items) {
      const b = document.createElement("button");
      b.type = "button";
      const name = document.createElement("strong");
      name.textContent = s.name;
      b.append(name, document.createTextNode(`${(s.target_species || []).join(", ")} · ${s.design}`));
      b.addEventListener("click", () => joinStudy(s.id));
      list.append(b);
    }
  } catch (e) {
    list.textContent = "";
    $("join-error").textContent = `Cannot reach the camp server (${e.message}). Join the camp Wi-Fi and try again.`;
  }
}

// showEnrol shows the join step; once joined, the phone opens the study
// its code was for.
function showEnrol(code = "") {
  enrol.showJoinScreen(state.device, (ans, observer) => {
    // joinStudy reads the initials from the study list's field.
    $("observer").value = observer;
    state.observer = observer;
    db.setMeta("observer", observer).catch((e) => console.warn("initials not kept:", e));
    const studyID = (ans.studies || [])[0];
    if (state.study && state.study.id === studyID) {
      show("record");
      syncSoon();
    } else if (studyID) joinStudy(studyID);
    else showJoin();
  }, code, state.observer);
}

async function joinStudy(id) {
  state.observer = $("observer").value.trim();
  await db.setMeta("observer", state.observer);
  try {
    const study = await server.getStudy(id);
    await db.setMeta("study", study);
    await useStudy(study, true);
    syncSoon();
  } catch (e) {
    // After joining by code the study list is not on the screen: show
    // it, so the error is seen and the study can be tapped to try again.
    if ($("screen-join").hidden) await showJoin();
    $("join-error").textContent = `Could not load the study: ${e.message}`;
  }
}

async function useStudy(study, fresh) {
  state.study = study;
  $("study-name").textContent = study.name;
  fillStudyFields(study);
  await reloadCaptures();
  const accepted = await db.getMeta(`cautions:${study.id}`);
  if (!accepted) {
    $("study-cautions").textContent = [study.cautions, study.permit_ref ? `Permit: ${study.permit_ref}` : ""].filter(Boolean).join("\n");
    show("cautions");
  } else {
    show("record");
    restoreDraft();
  }
  if (fresh) toast(`Study ${study.name} is ready on this phone`);
  watchPosition();
}

function fillStudyFields(study) {
  const species = $("species");
  species.textContent = "";
  for (const name of study.target_species || []) species.append(new Option(name, name));
  species.append(new Option("Other species…", "__other"));
  const meas = $("measurements");
  meas.textContent = "";
  for (const m of study.measurements || []) {
    const id = `m-${m.name.replace(/\W+/g, "-")}`;
    const label = document.createElement("label");
    label.htmlFor = id;
    label.textContent = `${m.name} (${m.unit})`;
    const input = document.createElement("input");
    input.id = id;
    input.inputMode = "decimal";
    input.dataset.measurement = m.name;
    input.dataset.unit = m.unit;
    meas.append(label, input);
  }
  renderStations();
}

function renderStations() {
  const sel = $("station");
  const current = sel.value;
  sel.textContent = "";
  sel.append(new Option("— choose the station —", ""));
  const ordered = nearestStations(state.study.stations || [], state.position);
  for (const { station, metres } of ordered) {
    const label = metres == null ? station.label || station.id : `${station.label || station.id} (${Math.round(metres)} m away)`;
    sel.append(new Option(label, station.id));
  }
  sel.value = current;
}

// ---------- GPS ----------

let watching = false;
function watchPosition() {
  if (watching || !("geolocation" in navigator)) {
    if (!("geolocation" in navigator)) $("gps-line").textContent = "Position: this browser gives no GPS";
    return;
  }
  watching = true;
  navigator.geolocation.watchPosition(
    (p) => {
      const first = !state.position;
      state.position = { lat: p.coords.latitude, lon: p.coords.longitude, accuracy: p.coords.accuracy };
      $("gps-line").textContent = `Position: ${p.coords.latitude.toFixed(5)}, ${p.coords.longitude.toFixed(5)} (± ${Math.round(p.coords.accuracy)} m)`;
      if (first) renderStations();
    },
    () => {
      $("gps-line").textContent = "Position: not available (allow location to record it with each capture)";
    },
    { enableHighAccuracy: true, maximumAge: 30_000, timeout: 60_000 },
  );
}

// ---------- the capture form ----------

function wireForm() {
  const form = $("capture-form");
  $("tag").addEventListener("input", () => {
    updateTagStatus(true);
    saveDraft();
  });
  $("tag-keyboard").addEventListener("click", () => {
    const tag = $("tag");
    const letters = tag.inputMode !== "text";
    tag.inputMode = letters ? "text" : "numeric";
    $("old-tag").inputMode = tag.inputMode;
    $("tag-keyboard").textContent = letters ? "123" : "ABC";
    $("tag-keyboard").setAttribute("aria-pressed", String(letters));
    tag.blur();
    tag.focus();
  });
  $("species").addEventListener("change", () => {
    $("species-other").hidden = $("species").value !== "__other";
  });
  form.addEventListener("change", (e) => {
    if (e.target.name === "event") $("old-tag-row").hidden = e.target.value !== "retag";
    saveDraft();
  });
  form.addEventListener("input", saveDraft);
  form.addEventListener("submit", (e) => {
    e.preventDefault();
    saveRecord();
  });
  $("cancel-edit").addEventListener("click", () => resetForm(true));
  $("delete-record").addEventListener("click", deleteRecord);
  $("accept-cautions").addEventListener("click", async () => {
    await db.setMeta(`cautions:${state.study.id}`, new Date().toISOString());
    show("record");
    restoreDraft();
  });
}

function updateTagStatus(fromTyping) {
  const typed = $("tag").value;
  const chips = $("tag-suggestions");
  chips.textContent = "";
  for (const t of suggestTags(state.index, typed)) {
    const b = document.createElement("button");
    b.type = "button";
    b.textContent = t;
    b.addEventListener("click", () => {
      $("tag").value = t;
      updateTagStatus(true);
      saveDraft();
    });
    chips.append(b);
  }
  const box = $("tag-status");
  box.className = "tag-status";
  box.textContent = "";
  if (!normaliseTag(typed)) return;
  const found = lookupTag(state.index, typed);
  if (state.editing && found.last && found.last.id === state.editing.id) {
    appendTagWarning(box, typed);
    return;
  }
  const head = document.createElement("strong");
  box.classList.add(found.status);
  switch (found.status) {
    case "new":
      head.textContent = "New tag: not seen before in this study";
      box.append(head);
      break;
    case "recapture":
      head.textContent = "Recapture: this animal is known";
      box.append(head, document.createTextNode(`Last record: ${formatLast(found.last, state.study)}`));
      break;
    case "unmarked":
      head.textContent = "Seen before, but never recorded as newly marked: check the tag";
      box.append(head, document.createTextNode(`Last record: ${formatLast(found.last, state.study)}`));
      break;
    case "dead":
      head.textContent = "This tag was recorded as found dead: check the tag";
      box.append(head, document.createTextNode(`Last record: ${formatLast(found.last, state.study)}`));
      break;
  }
  appendTagWarning(box, typed);
  if (fromTyping && !state.editing) {
    const ev = eventFor(found.status);
    const current = document.querySelector('input[name="event"]:checked');
    if (current && (current.value === "new" || current.value === "recapture")) {
      document.querySelector(`input[name="event"][value="${ev}"]`).checked = true;
    }
  }
}

// appendTagWarning adds, below the tag's status, what the server will make
// of the tag: a tag outside the study's series is saved, but is worth a
// second look at the net while the animal is still in hand.
function appendTagWarning(box, typed) {
  const problem = tagProblems(typed, state.study && state.study.tag_series);
  if (!problem.refuse && !problem.warn) return;
  const p = document.createElement("p");
  p.className = "tag-warning";
  p.textContent = problem.refuse || problem.warn;
  box.append(p);
}

function radio(name) {
  const el = document.querySelector(`input[name="${name}"]:checked`);
  return el ? el.value : "";
}

function setRadio(name, value) {
  const el = document.querySelector(`input[name="${name}"][value="${value}"]`);
  if (el) el.checked = true;
}

// readForm turns the form into a capture body, or throws an error naming
// the field that needs attention.
function readForm() {
  const tag = normaliseTag($("tag").value);
  if (!tag) throw fieldError("tag", "Enter the tag ID");
  const refused = tagProblems(tag).refuse;
  if (refused) throw fieldError("tag", refused);
  const event = radio("event");
  const oldTag = normaliseTag($("old-tag").value);
  if (event === "retag" && !oldTag) throw fieldError("old-tag", "Enter the old tag ID that this tag replaces");
  if (event === "retag" && oldTag === tag) throw fieldError("old-tag", "The old and new tag IDs are the same");
  const oldRefused = event === "retag" && tagProblems(oldTag).refuse;
  if (oldRefused) throw fieldError("old-tag", oldRefused.replace("The tag ID", "The old tag ID"));
  let species = $("species").value;
  if (species === "__other") species = $("species-other").value.trim();
  const massText = $("mass").value.trim().replace(",", ".");
  let mass = null;
  if (massText) {
    mass = Number(massText);
    if (!Number.isFinite(mass) || mass <= 0) throw fieldError("mass", "Mass must be a number of grams above 0");
  }
  const measurements = [];
  for (const input of document.querySelectorAll("[data-measurement]")) {
    const t = input.value.trim().replace(",", ".");
    if (!t) continue;
    const v = Number(t);
    if (!Number.isFinite(v)) throw fieldError(input.id, `${input.dataset.measurement} must be a number`);
    measurements.push({ name: input.dataset.measurement, value: v, unit: input.dataset.unit });
  }
  const base = state.editing || {};
  const body = {
    ...base,
    id: base.id || uuidv7(),
    study_id: state.study.id,
    tag_id: tag,
    event,
    species,
    sex: radio("sex"),
    age: radio("age"),
    fate: event === "dead" ? "died" : radio("fate"),
    station_id: $("station").value,
    notes: $("notes").value.trim(),
    observer: base.observer || state.observer,
    device: base.device || state.device,
    captured_at: base.captured_at || new Date().toISOString(),
    measurements,
    revision: base.revision || {},
  };
  if (event === "retag") body.old_tag_id = oldTag;
  else delete body.old_tag_id;
  if (mass != null) body.mass_g = mass;
  else delete body.mass_g;
  if (!base.id && state.position) {
    body.lat = state.position.lat;
    body.lon = state.position.lon;
    body.accuracy_m = state.position.accuracy;
  }
  return body;
}

function fieldError(id, message) {
  const e = new Error(message);
  e.field = id;
  return e;
}

async function saveRecord() {
  $("form-error").textContent = "";
  let body;
  try {
    body = readForm();
  } catch (e) {
    $("form-error").textContent = e.message;
    if (e.field) $(e.field).focus();
    return;
  }
  const existing = await db.getOutboxEntry(body.id);
  const parent = body.revision && body.revision.id ? body.revision.id : null;
  const entry = enqueue(existing, body, parent, Date.now(), await server.stamp(state.device));
  await db.saveRecord(body, entry);
  clearDraft();
  toast(state.editing ? "Change saved on this phone" : `Saved ${body.tag_id} on this phone`);
  await reloadCaptures();
  resetForm(false);
  // Back to the tag field for the next animal.
  window.scrollTo(0, 0);
  syncSoon();
}

async function deleteRecord() {
  if (!state.editing) return;
  if (!confirm(`Delete the record of ${state.editing.tag_id}? The coordinator can still see it in the record's history.`)) return;
  const body = { ...state.editing, revision: { ...(state.editing.revision || {}), deleted: true } };
  const existing = await db.getOutboxEntry(body.id);
  const entry = enqueue(existing, body, body.revision.id || null, Date.now(), await server.stamp(state.device));
  await db.saveRecord(body, entry);
  toast("Record deleted");
  await reloadCaptures();
  resetForm(true);
  syncSoon();
}

function resetForm(all) {
  const keepStation = $("station").value;
  const keepSpecies = $("species").value;
  $("capture-form").reset();
  $("old-tag-row").hidden = true;
  $("species-other").hidden = true;
  if (!all) {
    $("station").value = keepStation;
    $("species").value = keepSpecies;
  }
  state.editing = null;
  $("editing-banner").hidden = true;
  $("delete-record").hidden = true;
  $("save").textContent = "Save record";
  updateTagStatus(false);
  clearDraft();
}

function editRecord(c) {
  resetForm(true);
  state.editing = c;
  $("tag").value = c.tag_id || "";
  $("old-tag").value = c.old_tag_id || "";
  setRadio("event", c.event);
  $("old-tag-row").hidden = c.event !== "retag";
  const species = $("species");
  if ([...species.options].some((o) => o.value === c.species)) species.value = c.species;
  else if (c.species) {
    species.value = "__other";
    $("species-other").hidden = false;
    $("species-other").value = c.species;
  }
  setRadio("sex", c.sex || "unknown");
  setRadio("age", c.age || "unknown");
  setRadio("fate", c.fate || "released");
  $("mass").value = c.mass_g ?? "";
  $("station").value = c.station_id || "";
  $("notes").value = c.notes || "";
  for (const m of c.measurements || []) {
    const input = document.querySelector(`[data-measurement="${CSS.escape(m.name)}"]`);
    if (input) input.value = m.value;
  }
  $("editing-banner").hidden = false;
  $("delete-record").hidden = false;
  $("save").textContent = "Save changes";
  show("record");
}

// Drafts: every keystroke is kept in localStorage, so a half-entered
// record survives the battery dying before Save.
function saveDraft() {
  if (!state.study) return;
  const form = $("capture-form");
  const data = {};
  for (const el of form.elements) {
    if (!el.name && !el.dataset.measurement) continue;
    const key = el.name || `m:${el.dataset.measurement}`;
    if (el.type === "radio") {
      if (el.checked) data[key] = el.value;
    } else data[key] = el.value;
  }
  data.__editing = state.editing ? state.editing.id : null;
  try {
    localStorage.setItem(`${DRAFT_KEY}:${state.study.id}`, JSON.stringify(data));
  } catch {}
}

function restoreDraft() {
  let data = null;
  try {
    data = JSON.parse(localStorage.getItem(`${DRAFT_KEY}:${state.study.id}`) || "null");
  } catch {}
  if (!data || !data.tag_id) return;
  if (data.__editing) {
    const c = state.captures.find((x) => x.id === data.__editing);
    if (c) editRecord(c);
  }
  for (const el of $("capture-form").elements) {
    const key = el.name || (el.dataset.measurement ? `m:${el.dataset.measurement}` : null);
    if (!key || !(key in data)) continue;
    if (el.type === "radio") el.checked = el.value === data[key];
    else el.value = data[key];
  }
  $("old-tag-row").hidden = radio("event") !== "retag";
  $("species-other").hidden = $("species").value !== "__other";
  updateTagStatus(false);
  toast("Unsaved entry restored");
}

function clearDraft() {
  try {
    localStorage.removeItem(`${DRAFT_KEY}:${state.study.id}`);
  } catch {}
}

// ---------- lists ----------

async function reloadCaptures() {
  state.captures = await db.capturesForStudy(state.study.id);
  state.index = buildTagIndex(state.captures);
  await renderCounts();
}

async function renderToday() {
  const outbox = new Set((await db.allOutbox()).map((e) => e.id));
  const today = new Date().toDateString();
  const mine = state.captures
    .filter((c) => !(c.revision && c.revision.deleted))
    .filter((c) => new Date(c.captured_at).toDateString() === today)
    .sort((a, b) => String(b.captured_at).localeCompare(String(a.captured_at)));
  $("today-count").textContent = `${mine.length} record${mine.length === 1 ? "" : "s"} today. Tap one to correct it.`;
  const list = $("today-list");
  list.textContent = "";
  for (const c of mine) {
    const li = document.createElement("li");
    const b = document.createElement("button");
    b.type = "button";
    const tag = document.createElement("span");
    tag.className = "tag";
    tag.textContent = c.tag_id;
    b.append(tag, document.createTextNode(` · ${c.event} · ${formatWhen(c.captured_at)}`), document.createElement("br"));
    b.append(document.createTextNode(formatLast(c, state.study)));
    if (outbox.has(c.id)) {
      const w = document.createElement("span");
      w.className = "waiting";
      w.textContent = " · waiting to sync";
      b.append(w);
    }
    b.addEventListener("click", () => editRecord(c));
    li.append(b);
    list.append(li);
  }
}

async function renderCounts() {
  const outbox = await db.allOutbox();
  const n = outbox.length;
  $("outbox-count").textContent = String(n);
  const tab = $("tab-count");
  tab.hidden = n === 0;
  tab.textContent = String(n);
  const last = await db.getMeta("last-sync");
  const pill = $("sync-pill");
  pill.classList.toggle("waiting", n > 0);
  pill.textContent = n > 0 ? `${n} waiting` : last ? `Synced ${formatWhen(last).replace(/^today /, "")}` : "Not synced yet";
  $("last-sync").textContent = last ? formatWhen(last) : "never";
}

async function renderOutbox() {
  await renderCounts();
  await checkStorage();
  const rej = $("rejected-list");
  rej.textContent = "";
  for (const e of await db.allOutbox()) {
    if (!e.rejected) continue;
    const d = document.createElement("div");
    d.className = "rejected";
    d.textContent = `${e.body.tag_id}: the server refused this record (${e.rejected}). Tap to correct it.`;
    d.addEventListener("click", () => editRecord(e.body));
    rej.append(d);
  }
}

function wireOutbox() {
  $("evict-ok").addEventListener("click", () => {
    $("evict-banner").hidden = true;
    try {
      sessionStorage.setItem("tagtally-evict-seen", "1");
    } catch {}
  });
  $("sync-now").addEventListener("click", () => syncNow(true));
  $("save-backup").addEventListener("click", saveBackup);
  $("change-study").addEventListener("click", async () => {
    const waiting = (await db.allOutbox()).length;
    if (waiting && !confirm(`${waiting} records have not reached the camp server. They stay on this phone. Change study anyway?`)) return;
    await db.setMeta("study", null);
    state.study = null;
    showJoin();
  });
}

// ---------- sync ----------

let syncTimer = null;
function syncSoon() {
  clearTimeout(syncTimer);
  syncTimer = setTimeout(() => syncNow(false), 300);
}

// A press of "Sync now" while an automatic sync is running must not be
// lost: it is remembered, and the running attempt reports its outcome as
// if it had been pressed for (else a failure would pass silently).
async function syncNow(byHand) {
  const msg = $("sync-message");
  if (byHand && state.study) {
    state.syncAsked = true;
    msg.textContent = "Trying the camp server…";
  }
  if (state.syncing || !state.study) return;
  state.syncing = true;
  const joinMark = enrol.joinCount();
  try {
    if (!(await server.serverAnswers())) {
      $("server-state").textContent = "not answering (records stay safe on this phone)";
      if (state.syncAsked) msg.textContent = "The camp server does not answer. Your records are safe on this phone.";
      return;
    }
    $("server-state").textContent = "answering";
    checkForNewBuild();
    const pushed = await server.pushOutbox(state.device);
    const pulled = await server.pullStudy(state.study.id, state.device);
    await db.setMeta("last-sync", new Date().toISOString());
    msg.textContent = `Sent ${pushed.stored}, received ${pulled}` + (pushed.rejected ? `; ${pushed.rejected} refused, see below` : "");
    await reloadCaptures();
    if (!$("screen-outbox").hidden) await renderOutbox();
  } catch (e) {
    if (e.status === 401 && enrol.joinCount() === joinMark) enrol.showRevoked(() => showEnrol());
    msg.textContent = `Sync stopped: ${e.message}. Nothing was lost; it will try again.`;
  } finally {
    state.syncing = false;
    state.syncAsked = false;
    // Not awaited: the counts are cosmetic. A read cut short (the browser
    // cleared storage at this moment) must not become an uncaught error;
    // the next render shows the truth, and the vanished-records check
    // tells the crew.
    renderCounts().catch((e) => console.warn("counts not refreshed:", e));
  }
}

async function saveBackup() {
  const outbox = await db.allOutbox();
  const file = {
    kind: "tagtally outbox backup",
    device: state.device,
    study_id: state.study ? state.study.id : null,
    saved_at: new Date().toISOString(),
    records: outbox.map((e) => e.body),
  };
  const blob = new Blob([JSON.stringify(file, null, 1)], { type: "application/json" });
  const a = document.createElement("a");
  a.href = URL.createObjectURL(blob);
  a.download = `tagtally-outbox-${state.device}-${new Date().toISOString().slice(0, 16).replace(/[:T]/g, "")}.json`;
  document.body.append(a);
  a.click();
  a.remove();
  setTimeout(() => URL.revokeObjectURL(a.href), 10_000);
  toast(`Backup of ${outbox.length} records saved to Downloads`);
}

let toastTimer = null;
function toast(text) {
  const t = $("toast");
  t.textContent = text;
  t.hidden = false;
  clearTimeout(toastTimer);
  toastTimer = setTimeout(() => (t.hidden = true), 3500);
}

start().catch((e) => {
  document.body.prepend(Object.assign(document.createElement("p"), { className: "error", textContent: `The app could not start: ${e.message}` }));
});
