// The outbox: records saved on the phone that the server has not yet
// confirmed. The rules, kept here as pure functions so they are tested
// outside the browser:
//   - saving puts the record in the outbox before anything else happens;
//   - an entry leaves the outbox only when the server's reply for that
//     exact version says it was stored or already held;
//   - an edit made while an earlier version is on its way replaces the
//     waiting body but keeps the entry waiting, so the newer version is
//     sent next time (as an edit of the revision the server confirmed)
//     and the older confirmation cannot clear it.

// enqueue returns the outbox entry for a saved record. parent is the last
// server-confirmed revision ID of that record (null for a new record);
// stamp is the clock stamp of this save. A waiting entry keeps its parent:
// the edits between two syncs travel as one revision.
export function enqueue(existing, capture, parent, nowMs, stamp) {
  const version = existing ? existing.version + 1 : 1;
  return {
    id: capture.id,
    body: capture,
    parent: existing ? existing.parent : parent ?? null,
    deleted: Boolean(capture.revision && capture.revision.deleted),
    stamp,
    version,
    saved_at: new Date(nowMs).toISOString(),
    attempts: existing ? existing.attempts : 0,
  };
}

// waiting lists the entries to send: all but those the server refused
// for good (they wait for the crew to correct them, which re-enqueues).
export function waiting(entries) {
  return entries.filter((e) => !e.rejected);
}

// batchFrom takes up to max waiting entries, oldest first.
export function batchFrom(entries, max = 200) {
  return [...entries].sort((a, b) => a.saved_at.localeCompare(b.saved_at)).slice(0, max);
}

const confirmed = (r) => r && (r.status === "stored" || r.status === "already_had");

// settle applies the server's push reply to the entries that were sent.
// entries are the outbox as it is now (it may have changed during the
// push); sent lists {id, version} in the order they were sent, and
// results[i] is the server's answer for sent[i]. It returns
//   confirm:  ids to delete from the outbox,
//   revisions: [id, revision ID] confirmed for the version the phone shows,
//   keep:     entries to put back, updated,
//   rejected: [{id, reason}] refused for good.
// A refused record stays in the outbox with the reason, so nothing is
// lost and the crew can correct it; one the server may take later (a
// parent it has not seen yet: retry) just waits for the next sync.
export function settle(entries, sent, results) {
  const byId = new Map(entries.map((e) => [e.id, e]));
  const out = { confirm: [], revisions: [], keep: [], rejected: [] };
  sent.forEach((s, i) => {
    const r = results[i];
    const e = byId.get(s.id);
    if (!r || !e || (r.capture_id && r.capture_id !== s.id)) return;
    if (confirmed(r)) {
      if (e.version === s.version) {
        out.confirm.push(e.id);
        out.revisions.push([e.id, r.revision]);
      } else {
        // Edited again while this version travelled: the newer body is
        // an edit of what the server now holds.
        out.keep.push({ ...e, parent: r.revision || e.parent });
      }
      return;
    }
    const reason = r.reason || "refused by the server";
    if (r.retry) {
      out.keep.push({ ...e, attempts: e.attempts + 1, last_error: reason });
    } else {
      out.keep.push({ ...e, attempts: e.attempts + 1, rejected: reason });
      out.rejected.push({ id: e.id, reason });
    }
  });
  return out;
}
