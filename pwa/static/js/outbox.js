// The outbox: records saved on the phone that the server has not yet
// confirmed. The rules, kept here as pure functions so they are tested
// outside the browser:
//   - saving puts the record in the outbox before anything else happens;
//   - an entry leaves the outbox only when the server's reply for that
//     exact version says it was stored or already held;
//   - an edit made while an earlier version is on its way replaces the
//     waiting body but keeps the entry waiting, so the newer version is
//     sent next time and the older confirmation cannot clear it.

// enqueue returns the outbox entry for a saved record. parent is the last
// server-confirmed revision ID of that record (null for a new record).
export function enqueue(existing, capture, parent, nowMs) {
  const version = existing ? existing.version + 1 : 1;
  return {
    id: capture.id,
    body: capture,
    parent: existing ? existing.parent : parent ?? null,
    version,
    saved_at: new Date(nowMs).toISOString(),
    attempts: existing ? existing.attempts : 0,
  };
}

// batchFrom takes up to max waiting entries, oldest first.
export function batchFrom(entries, max = 200) {
  return [...entries].sort((a, b) => a.saved_at.localeCompare(b.saved_at)).slice(0, max);
}

// settle applies the server's per-record replies to the entries that were
// sent. sent maps id -> the version that was sent. It returns
// {confirm: [ids to delete from the outbox], keep: [entries to keep, with
// updated parent/attempts], rejected: [{id, reason}]}.
//
// A record the server rejected stays in the outbox, marked with the
// reason, so nothing is lost and the crew can correct it.
export function settle(entries, sent, replies) {
  const byId = new Map(entries.map((e) => [e.id, e]));
  const confirm = [];
  const keep = [];
  const rejected = [];
  for (const r of replies) {
    const e = byId.get(r.id);
    if (!e) continue;
    const sentVersion = sent.get(r.id);
    if (r.status === "stored" || r.status === "already_had") {
      if (e.version === sentVersion) {
        confirm.push(e.id);
      } else {
        // Edited again while this version travelled: the newer body must
        // descend from what the server now holds.
        keep.push({ ...e, parent: r.revision ?? e.parent });
      }
    } else {
      keep.push({ ...e, attempts: e.attempts + 1, rejected: r.reason || "rejected by the server" });
      rejected.push({ id: e.id, reason: r.reason || "rejected by the server" });
    }
  }
  return { confirm, keep, rejected };
}
