// Revisions as the camp server's sync protocol knows them. Every save on
// the phone is one revision of a record: the record's fields plus
//   revision.parents  the revision it edits (none for a first version),
//   revision.stamp    a hybrid logical clock stamp (Kulkarni et al. 2014),
//   revision.device   this phone,
//   revision.deleted  true for a deletion.
// The server computes the revision ID (a hash of parents, body and the
// deleted flag), so resending the same save gives the same ID and the
// server answers "already_had". Pure functions, tested with Node.

// MAX_AHEAD_MS bounds how far a stamp seen from elsewhere can pull this
// phone's clock into the future (the server uses the same 24 hours).
export const MAX_AHEAD_MS = 24 * 3600 * 1000;

const hex = (n, width) => n.toString(16).padStart(width, "0");

// formatStamp writes a stamp so that string order is stamp order: 12 hex
// digits of Unix milliseconds, 8 of the logical counter, "-" and device.
export function formatStamp(wall, logical, device) {
  const s = hex(wall, 12) + hex(logical, 8);
  return device ? `${s}-${device}` : s;
}

// parseStamp reads a stamp made by formatStamp, or returns null.
export function parseStamp(s) {
  const m = /^([0-9a-f]{12})([0-9a-f]{8})(?:-(.+))?$/.exec(String(s ?? ""));
  if (!m) return null;
  return { wall: parseInt(m[1], 16), logical: parseInt(m[2], 16), device: m[3] || "" };
}

// nextStamp is the clock's send rule: wall' = max(wall, now); logical
// counts up while wall' stays the same, else restarts at 0. clock is
// {wall, logical} (or null for a new phone); returns the new clock.
export function nextStamp(clock, nowMs) {
  const wall = Math.max(clock ? clock.wall : 0, Math.floor(nowMs));
  const logical = clock && wall === clock.wall ? clock.logical + 1 : 0;
  return { wall, logical };
}

// observeStamp is the receive rule for a stamp seen in a pulled revision:
// the clock moves to it when it is later, but never further than
// MAX_AHEAD_MS past the phone's own time.
export function observeStamp(clock, stamp, nowMs) {
  const s = parseStamp(stamp);
  const c = clock || { wall: 0, logical: 0 };
  if (!s) return c;
  const wall = Math.min(s.wall, Math.floor(nowMs) + MAX_AHEAD_MS);
  if (wall > c.wall) return { wall, logical: wall === s.wall ? s.logical : 0 };
  if (wall === c.wall && s.logical > c.logical) return { wall, logical: s.logical };
  return c;
}

// Fields of a capture the server knows. A revision sent to the server
// carries only these, so nothing local leaks into the record.
const FIELDS = [
  "id", "study_id", "occasion", "occasion_set_by_hand", "station_id", "tag_id", "old_tag_id", "event",
  "species", "sex", "age", "mass_g", "measurements", "fate", "observer", "device", "captured_at",
  "lat", "lon", "accuracy_m", "notes",
];

// wireRevision is the revision sent in a push for an outbox entry.
export function wireRevision(entry, device) {
  const out = {};
  for (const f of FIELDS) {
    const v = entry.body[f];
    if (v !== undefined && v !== null && v !== "") out[f] = v;
  }
  out.revision = {
    parents: entry.parent ? [entry.parent] : [],
    stamp: entry.stamp,
    device,
    deleted: Boolean(entry.deleted),
  };
  return out;
}

// better orders two concurrent revisions of one record the way every
// replica does: live before deleted, longer history (depth), later stamp,
// greater revision ID.
function better(a, b) {
  const ra = a.revision || {};
  const rb = b.revision || {};
  if (Boolean(ra.deleted) !== Boolean(rb.deleted)) return !ra.deleted;
  if ((ra.depth || 0) !== (rb.depth || 0)) return (ra.depth || 0) > (rb.depth || 0);
  if ((ra.stamp || "") !== (rb.stamp || "")) return (ra.stamp || "") > (rb.stamp || "");
  return (ra.id || "") > (rb.id || "");
}

// pickRevision chooses which of two revisions of the same record the phone
// shows: a revision that descends from the other wins; otherwise the
// merge order above. It returns the chosen one.
export function pickRevision(held, incoming) {
  if (!held) return incoming;
  const h = held.revision || {};
  const i = incoming.revision || {};
  if (h.id && h.id === i.id) return held;
  if (h.id && (i.parents || []).includes(h.id)) return incoming;
  if (i.id && (h.parents || []).includes(i.id)) return held;
  return better(incoming, held) ? incoming : held;
}
