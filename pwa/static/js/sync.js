// Talking to the camp server. Reachability is judged by asking the server
// (a short health request), never by navigator.onLine, which only says a
// network interface is up. Background sync is not relied on: the app syncs
// whenever it is open and the server answers.

import * as db from "./db.js";
import { batchFrom, settle } from "./outbox.js";

const PUSH_BATCH = 200;
const PULL_PAGE = 500;

async function fetchJSON(url, options = {}, timeoutMs = 8000) {
  const ctrl = new AbortController();
  const timer = setTimeout(() => ctrl.abort(), timeoutMs);
  try {
    const headers = { Accept: "application/json", ...(options.headers || {}) };
    const token = await db.getMeta("token");
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

// pushOutbox sends waiting records in batches and clears each one only
// after the server confirms that exact version. Returns counts.
export async function pushOutbox(deviceID) {
  let stored = 0;
  let rejected = 0;
  for (let round = 0; round < 50; round++) {
    const waiting = (await db.allOutbox()).filter((e) => !e.rejected || e.attempts < 3);
    if (waiting.length === 0) break;
    const batch = batchFrom(waiting, PUSH_BATCH);
    const sent = new Map(batch.map((e) => [e.id, e.version]));
    const body = {
      device: deviceID,
      revisions: batch.map((e) => ({
        capture: e.body,
        parents: e.parent ? [e.parent] : [],
        deleted: Boolean(e.body.revision && e.body.revision.deleted),
      })),
    };
    const reply = await fetchJSON("/api/v1/sync/push", {
      method: "POST",
      headers: { "Content-Type": "application/json" },
      body: JSON.stringify(body),
    }, 20000);
    const results = (reply && reply.results) || [];
    const fresh = await db.allOutbox();
    const { confirm, keep, rejected: rej } = settle(fresh, sent, results);
    const revisions = results
      .filter((r) => (r.status === "stored" || r.status === "already_had") && r.revision)
      .map((r) => [r.id, r.revision]);
    await db.applySettled(confirm, keep, revisions);
    stored += confirm.length;
    rejected += rej.length;
    if (confirm.length === 0) break; // nothing moved: stop rather than loop
  }
  return { stored, rejected };
}

// pullStudy fetches every change after the stored cursor, page by page,
// and stores the cursor only after the page's records are stored.
export async function pullStudy(studyID) {
  let pulled = 0;
  for (let page = 0; page < 1000; page++) {
    const cursor = (await db.getMeta(`cursor:${studyID}`)) || "";
    const url = `/api/v1/sync/pull?study=${encodeURIComponent(studyID)}&cursor=${encodeURIComponent(cursor)}&limit=${PULL_PAGE}`;
    const reply = await fetchJSON(url, {}, 20000);
    const records = (reply && reply.captures) || [];
    await db.putPulled(records);
    pulled += records.length;
    if (reply && reply.next_cursor !== undefined) await db.setMeta(`cursor:${studyID}`, reply.next_cursor);
    if (!reply || !reply.more) break;
  }
  return pulled;
}
