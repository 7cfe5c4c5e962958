// Talking to the camp server. Reachability is judged by asking the server
// (a short health request), never by navigator.onLine, which only says a
// network interface is up. Background sync is not relied on: the app syncs
// whenever it is open and the server answers.

import * as db from "./db.js";
import { batchFrom, settle, waiting } from "./outbox.js";
import { wireRevision, pickRevision, observeStamp, nextStamp, formatStamp } from "./revision.js";

const PUSH_BATCH = 200;
const PULL_PAGE = 500;

// fetchJSON asks the camp server and gives up after timeoutMs, so a server
// that accepts the connection but never answers cannot leave a button
// waiting for ever. withToken sends this phone's token (not when joining:
// an old, revoked token must not be sent with a new code).
export async function fetchJSON(url, options = {}, timeoutMs = 8000, withToken = true) {
  const ctrl = new AbortController();
  const timer = setTimeout(() => ctrl.abort(), timeoutMs);
  try {
    const headers = { Accept: "application/json", ...(options.headers || {}) };
    const token = withToken ? await db.getMeta("token") : null;
    if (token) headers.Authorization = `Bearer ${token}`;
    const res = await fetch(url, { ...options, headers, signal: ctrl.signal, cache: "no-store" });
    const text = await res.text();
    let body = null;
    try {
      body = text ? JSON.parse(text) : null;
    } catch {
      body = null;
    }
    if (!res.ok) {
      const msg = body && body.error ? body.error : `server answered ${res.status}`;
      const err = new Error(msg);
      err.status = res.status;
      throw err;
    }
    return body;
  } finally {
    clearTimeout(timer);
  }
}

export async function serverAnswers() {
  try {
    await fetchJSON("/healthz", {}, 4000);
    return true;
  } catch {
    return false;
  }
}

export async function listStudies() {
  return fetchJSON("/api/v1/studies");
}

export async function getStudy(id) {
  return fetchJSON(`/api/v1/studies/${encodeURIComponent(id)}`);
}

// pushBatch sends revisions and returns the server's results, one per
// revision in the same order.
async function pushBatch(deviceID, revisions) {
  const reply = await fetchJSON("/api/v1/sync/push", {
    method: "POST",
    headers: { "Content-Type": "application/json" },
    body: JSON.stringify({ source: deviceID, revisions }),
  }, 30000);
  const results = (reply && reply.results) || [];
  if (results.length !== revisions.length) throw new Error("the server's reply does not match what was sent");
  return results;
}

// pushOutbox sends waiting records in batches and clears each one only
// after the server confirms that exact version (status stored or
// already_had, which the server sends only after its commit). Returns
// counts.
export async function pushOutbox(deviceID) {
  let stored = 0;
  let rejected = 0;
  const tried = new Set();
  for (let round = 0; round < 100; round++) {
    const pending = waiting(await db.allOutbox()).filter((e) => !tried.has(`${e.id}/${e.version}`));
    if (pending.length === 0) break;
    const batch = batchFrom(pending, PUSH_BATCH);
    const sent = batch.map((e) => ({ id: e.id, version: e.version }));
    for (const e of batch) tried.add(`${e.id}/${e.version}`);
    const wire = batch.map((e) => wireRevision(e, deviceID));
    const results = await pushBatch(deviceID, wire);
    const fresh = await db.allOutbox();
    const r = settle(fresh, sent, results);
    const revOf = new Map(wire.map((w, i) => [w.id, { ...w.revision, id: results[i].revision }]));
    await db.applySettled(r.confirm, r.keep, r.revisions.map(([id]) => [id, revOf.get(id)]));
    stored += r.confirm.length;
    rejected += r.rejected.length;
  }
  return { stored, rejected };
}

// resendAll pushes again every record this phone made that the server
// confirmed before: after the server's change feed got a new epoch (its
// data file was restored from a backup), records it had acknowledged may
// be gone. Re-sending a revision the server holds changes nothing.
async function resendAll(deviceID, studyID) {
  const mine = (await db.allCaptures()).filter(
    (c) => c.study_id === studyID && c.revision && c.revision.id && c.revision.device === deviceID,
  );
  let resent = 0;
  for (let i = 0; i < mine.length; i += PUSH_BATCH) {
    const revs = mine.slice(i, i + PUSH_BATCH).map((c) => {
      const w = wireRevision({ body: c, parent: null, stamp: c.revision.stamp, deleted: c.revision.deleted }, deviceID);
      w.revision.parents = c.revision.parents || [];
      w.revision.id = c.revision.id;
      return w;
    });
    const results = await pushBatch(deviceID, revs);
    resent += results.filter((r) => r.status === "stored").length;
  }
  return resent;
}

// pullStudy fetches the study's changes after the stored cursor, page by
// page, storing the cursor only after the page's records are stored. The
// cursor names the server's feed epoch; when the server answers with a
// reset (a new epoch), the phone starts over from the beginning of the
// feed and re-sends what it had sent. Returns the number of revisions
// received.
export async function pullStudy(studyID, deviceID) {
  let pulled = 0;
  const key = `cursor:${studyID}`;
  let resend = false;
  for (let page = 0; page < 10000; page++) {
    const cursor = (await db.getMeta(key)) || "";
    const url = `/api/v1/sync/pull?study=${encodeURIComponent(studyID)}&skip_source=${encodeURIComponent(deviceID)}` +
      `&cursor=${encodeURIComponent(cursor)}&limit=${PULL_PAGE}`;
    const reply = await fetchJSON(url, {}, 30000);
    if (!reply || typeof reply.next !== "string") throw new Error("the server's pull reply has no cursor");
    if (reply.reset && cursor !== "") resend = true;
    const records = reply.revisions || [];
    let clock = (await db.getMeta("clock")) || null;
    for (const r of records) clock = observeStamp(clock, r.revision && r.revision.stamp, Date.now());
    await db.putPulled(records, pickRevision);
    if (clock) await db.setMeta("clock", clock);
    await db.setMeta(key, reply.next);
    pulled += records.length;
    if (!reply.more) break;
  }
  if (resend) await resendAll(deviceID, studyID);
  return pulled;
}

// stamp takes the next clock stamp for a save on this phone and keeps the
// clock in storage.
export async function stamp(deviceID) {
  const clock = nextStamp((await db.getMeta("clock")) || null, Date.now());
  await db.setMeta("clock", clock);
  return formatStamp(clock.wall, clock.logical, deviceID);
}
