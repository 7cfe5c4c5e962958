// What the phone knows about tags: which animal a tag belongs to (following
// retags, so an animal keeps one identity), the last record of that animal,
// and type-ahead suggestions. Pure functions over plain capture objects, so
// they are tested outside the browser.

// normaliseTag trims and upper-cases a tag as typed, so "kv-0012 " and
// "KV-0012" are the same tag.
export function normaliseTag(tag) {
  return String(tag ?? "").trim().toUpperCase();
}

// buildTagIndex maps every tag to the animal's latest record. captures are
// plain objects with id, tag_id, old_tag_id, event, captured_at and the
// revision.deleted flag. A retag links the old and new tag so both find
// the same animal.
export function buildTagIndex(captures) {
  const live = captures.filter((c) => !(c.revision && c.revision.deleted));
  live.sort((a, b) => String(a.captured_at).localeCompare(String(b.captured_at)));
  const animalOf = new Map(); // tag -> animal key (first tag of the chain)
  const last = new Map(); // animal key -> latest record
  const marked = new Set(); // animal keys with a new-mark record
  const keyFor = (tag) => animalOf.get(tag) ?? tag;
  for (const c of live) {
    const tag = normaliseTag(c.tag_id);
    if (!tag) continue;
    let key;
    if (c.event === "retag" && c.old_tag_id) {
      key = keyFor(normaliseTag(c.old_tag_id));
      animalOf.set(normaliseTag(c.old_tag_id), key);
    } else {
      key = keyFor(tag);
    }
    animalOf.set(tag, key);
    if (c.event === "new") marked.add(key);
    last.set(key, c);
  }
  return { animalOf, last, marked };
}

// lookupTag tells the crew at once what a tag means:
//   {status: "new"}                 never seen on this phone or the server
//   {status: "recapture", last}     seen before; last is that animal's latest record
//   {status: "dead", last}          the animal's latest record is a dead recovery
//   {status: "unmarked", last}      seen, but never recorded as newly marked
export function lookupTag(index, tag) {
  const t = normaliseTag(tag);
  if (!t || !index.animalOf.has(t)) return { status: "new" };
  const key = index.animalOf.get(t);
  const last = index.last.get(key);
  if (last && last.event === "dead") return { status: "dead", last };
  if (!index.marked.has(key)) return { status: "unmarked", last };
  return { status: "recapture", last };
}

// suggestTags returns up to limit known tags containing what was typed,
// those that start with it first, then (for digits) those whose number
// ends with them, then any that contain them, each in tag order. Field
// crews often type only the digits, so "12" finds "KV-0012" first.
export function suggestTags(index, typed, limit = 6) {
  const t = normaliseTag(typed);
  if (!t) return [];
  const starts = [];
  const endsWithDigits = [];
  const contains = [];
  const digitsOnly = /^\d+$/.test(t);
  for (const tag of index.animalOf.keys()) {
    if (tag === t) continue;
    if (tag.startsWith(t)) starts.push(tag);
    else if (digitsOnly && tag.replace(/\D/g, "").endsWith(t)) endsWithDigits.push(tag);
    else if (tag.includes(t)) contains.push(tag);
  }
  for (const list of [starts, endsWithDigits, contains]) list.sort();
  return starts.concat(endsWithDigits, contains).slice(0, limit);
}

// eventFor picks the event a crew most likely means for a tag status; the
// crew can always change it.
export function eventFor(status) {
  switch (status) {
    case "recapture":
    case "unmarked":
      return "recapture";
    default:
      return "new";
  }
}

// maxTagBytes is the longest tag ID the server accepts (in UTF-8 bytes),
// as sync checks every pushed record.
export const maxTagBytes = 128;

// tagProblems checks a tag as the crew typed it, before the record is
// saved:
//   {refuse: reason}  the server would refuse the record (a tag longer than
//                     maxTagBytes, or with a control character): the form
//                     does not save it, so it never waits in the outbox;
//   {warn: message}   the tag matches none of the study's tag series
//                     (series: the study's tag_series, each {name, pattern}
//                     with a pattern matched against the whole tag). The
//                     record can still be saved and is sent as typed; the
//                     coordinator's data checks list it.
//   {}                nothing to say.
// The patterns are the server's (Go) regular expressions; if one of them
// is not valid JavaScript the phone cannot tell which tags match, and
// gives no warning rather than a wrong one.
export function tagProblems(tag, series) {
  const t = normaliseTag(tag);
  if (!t) return {};
  const bytes = new TextEncoder().encode(t).length;
  if (bytes > maxTagBytes) {
    // Tags are letters and digits; an accented letter counts as two.
    return { refuse: `The tag ID is too long: at most ${maxTagBytes} characters` };
  }
  // Control characters (C0, DEL, C1) and the replacement character, as
  // the server refuses them.
  if (/[\u0000-\u001f\u007f-\u009f\ufffd]/u.test(t)) {
    return { refuse: "The tag ID has an invisible control character: clear the field and type it again" };
  }
  const list = Array.isArray(series) ? series.filter((s) => s && s.pattern) : [];
  if (list.length === 0) return {};
  const patterns = [];
  for (const s of list) {
    try {
      patterns.push(new RegExp(`^(?:${s.pattern})$`, "u"));
    } catch {
      return {};
    }
  }
  if (patterns.some((p) => p.test(t))) return {};
  const names = list.map((s) => `${s.name || "tags"}: ${s.pattern}`).join("; ");
  return { warn: `${t} does not match the study's tag format (${names}). Check the tag; you can still save the record.` };
}
