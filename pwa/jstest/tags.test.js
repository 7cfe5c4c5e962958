// Unit tests for the phone app's pure logic, run with Node's test runner:
//   node --test pwa/jstest/
// Expected values are worked by hand from the rules in the module
// comments (common practice for an outbox: clear only on confirmation).
import { test } from "node:test";
import assert from "node:assert/strict";
import { buildTagIndex, lookupTag, suggestTags, normaliseTag, eventFor, tagProblems } from "../static/js/tags.js";

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

// The series rule and the 128-byte limit are the server's (capture
// validation and sync's revision check); the values below are worked by
// hand from them.
test("a tag in the study's series gives no warning", () => {
  const series = [{ name: "ear tag", pattern: "BF-[0-9]{4}" }];
  assert.deepEqual(tagProblems("bf-0012 ", series), {});
  assert.deepEqual(tagProblems("", series), {});
  assert.deepEqual(tagProblems("BF-0012", []), {});
  assert.deepEqual(tagProblems("anything", undefined), {});
});

test("a tag outside every series is a warning, not a refusal", () => {
  const series = [
    { name: "ear tag", pattern: "BF-[0-9]{4}" },
    { name: "PIT tag", pattern: "[0-9]{15}" },
  ];
  const p = tagProblems("BF-012", series);
  assert.equal(p.refuse, undefined);
  assert.match(p.warn, /^BF-012 does not match the study's tag format \(ear tag: BF-\[0-9\]\{4\}; PIT tag: \[0-9\]\{15\}\)/);
  // The whole tag must match, as on the server: a longer tag is outside.
  assert.ok(tagProblems("BF-00123", series).warn);
  assert.deepEqual(tagProblems("985120012345678", series), {});
});

test("a pattern JavaScript cannot read gives no warning rather than a wrong one", () => {
  // (?P<n>...) is Go's named group; JavaScript's RegExp refuses it.
  assert.deepEqual(tagProblems("BF-012", [{ name: "ear tag", pattern: "BF-(?P<n>[0-9]{4})" }]), {});
});

test("tags the server would refuse are refused on the phone", () => {
  assert.match(tagProblems("A".repeat(129), []).refuse, /too long: at most 128 characters/);
  assert.deepEqual(tagProblems("A".repeat(128), []), {});
  // Counted in UTF-8 bytes, as the server counts: 43 x 2 bytes = 86 is
  // fine, 43 x 3 bytes = 129 is not.
  assert.deepEqual(tagProblems("\u00e9".repeat(43), []), {});
  assert.match(tagProblems("\u20ac".repeat(43), []).refuse, /too long/);
  assert.match(tagProblems("BF-\u00070012", []).refuse, /control character/);
  assert.match(tagProblems("BF-\u00850012", []).refuse, /control character/);
});
