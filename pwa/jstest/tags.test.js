// Unit tests for the phone app's pure logic, run with Node's test runner:
//   node --test pwa/jstest/
// Expected values are worked by hand from the rules in the module
// comments (common practice for an outbox: clear only on confirmation).
import { test } from "node:test";
import assert from "node:assert/strict";
import { buildTagIndex, lookupTag, suggestTags, normaliseTag, eventFor } from "../static/js/tags.js";

const caps = [
  { id: "1", tag_id: "KV-0012", event: "new", captured_at: "2026-05-01T06:00:00Z", species: "vole" },
  { id: "2", tag_id: "KV-0012", event: "recapture", captured_at: "2026-05-02T06:00:00Z", mass_g: 21 },
  { id: "3", tag_id: "KV-0120", event: "new", captured_at: "2026-05-01T07:00:00Z" },
  { id: "4", tag_id: "KV-0500", event: "retag", old_tag_id: "KV-0120", captured_at: "2026-05-03T07:00:00Z" },
  { id: "5", tag_id: "KV-0777", event: "recapture", captured_at: "2026-05-03T08:00:00Z" },
  { id: "6", tag_id: "KV-0900", event: "new", captured_at: "2026-05-03T08:00:00Z", revision: { deleted: true } },
  { id: "7", tag_id: "kv-0301 ", event: "new", captured_at: "2026-05-01T08:00:00Z" },
  { id: "8", tag_id: "KV-0301", event: "dead", captured_at: "2026-05-04T08:00:00Z" },
];

test("a tag never seen is new", () => {
  const idx = buildTagIndex(caps);
  assert.equal(lookupTag(idx, "KV-9999").status, "new");
  assert.equal(lookupTag(idx, "").status, "new");
});

test("a marked tag is a recapture and shows the latest record", () => {
  const idx = buildTagIndex(caps);
  const r = lookupTag(idx, " kv-0012");
  assert.equal(r.status, "recapture");
  assert.equal(r.last.id, "2");
});

test("a retag links old and new tags to one animal", () => {
  const idx = buildTagIndex(caps);
  assert.equal(lookupTag(idx, "KV-0500").status, "recapture");
  assert.equal(lookupTag(idx, "KV-0120").last.id, "4");
});

test("a recapture of a tag never marked is flagged", () => {
  assert.equal(lookupTag(buildTagIndex(caps), "KV-0777").status, "unmarked");
});

test("deleted records are ignored; dead animals are flagged", () => {
  const idx = buildTagIndex(caps);
  assert.equal(lookupTag(idx, "KV-0900").status, "new");
  assert.equal(lookupTag(idx, "KV-0301").status, "dead");
});

test("type-ahead finds tags by prefix first, then by trailing digits", () => {
  const idx = buildTagIndex(caps);
  assert.deepEqual(suggestTags(idx, "KV-01"), ["KV-0120"]);
  assert.deepEqual(suggestTags(idx, "12"), ["KV-0012", "KV-0120"]);
  assert.deepEqual(suggestTags(idx, "500"), ["KV-0500"]);
  assert.deepEqual(suggestTags(idx, "KV-0012"), []); // an exact match is not suggested again
  assert.equal(suggestTags(idx, "KV", 2).length, 2);
});

test("normalising and default events", () => {
  assert.equal(normaliseTag(" ab-1 "), "AB-1");
  assert.equal(eventFor("recapture"), "recapture");
  assert.equal(eventFor("new"), "new");
});
