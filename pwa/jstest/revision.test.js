// Revisions and clock stamps as the phone makes them. The stamp form is
// the one sync.Stamp.String documents in sync/hlc.go (its example:
// "018c1a2b3c4d00000002-phone-7"); the clock rules are Kulkarni et al.
// (2014), Figure 5, with values worked by hand.
import { test } from "node:test";
import assert from "node:assert/strict";
import { formatStamp, parseStamp, nextStamp, observeStamp, wireRevision, pickRevision, MAX_AHEAD_MS } from "../static/js/revision.js";

test("stamps are written as the server writes them and read back", () => {
  assert.equal(formatStamp(0x018c1a2b3c4d, 2, "phone-7"), "018c1a2b3c4d00000002-phone-7");
  assert.deepEqual(parseStamp("018c1a2b3c4d00000002-phone-7"), { wall: 0x018c1a2b3c4d, logical: 2, device: "phone-7" });
  assert.equal(parseStamp("018C1A2B3C4D00000002"), null, "upper-case hex is not the exact form");
  assert.equal(parseStamp(undefined), null);
});

test("string order of stamps is time order", () => {
  const a = formatStamp(1000, 5, "p");
  const b = formatStamp(1001, 0, "p");
  const c = formatStamp(0x10000, 0, "p");
  assert.ok(a < b && b < c);
});

test("the send rule counts up within one millisecond and restarts on a new one", () => {
  let c = nextStamp(null, 5000);
  assert.deepEqual(c, { wall: 5000, logical: 0 });
  c = nextStamp(c, 5000);
  assert.deepEqual(c, { wall: 5000, logical: 1 });
  c = nextStamp(c, 4000); // the phone's clock went back: the stamp does not
  assert.deepEqual(c, { wall: 5000, logical: 2 });
  c = nextStamp(c, 6000);
  assert.deepEqual(c, { wall: 6000, logical: 0 });
});

test("a later stamp from elsewhere moves the clock, but at most a day ahead", () => {
  const c = observeStamp({ wall: 5000, logical: 3 }, formatStamp(9000, 7, "x"), 5000);
  assert.deepEqual(c, { wall: 9000, logical: 7 });
  assert.deepEqual(nextStamp(c, 5000), { wall: 9000, logical: 8 });
  const far = observeStamp({ wall: 5000, logical: 0 }, formatStamp(5000 + 10 * MAX_AHEAD_MS, 0, "x"), 5000);
  assert.deepEqual(far, { wall: 5000 + MAX_AHEAD_MS, logical: 0 });
  assert.deepEqual(observeStamp({ wall: 5000, logical: 3 }, formatStamp(4000, 9, "x"), 5000), { wall: 5000, logical: 3 });
  assert.deepEqual(observeStamp({ wall: 5000, logical: 3 }, "garbage", 5000), { wall: 5000, logical: 3 });
});

test("a pushed revision carries only the record's fields and the revision metadata", () => {
  const entry = {
    body: { id: "u1", study_id: "s", tag_id: "T1", event: "new", notes: "", mass_g: null, local_only: 1, revision: { id: "old" } },
    parent: "0123456789abcdef0123456789abcdef",
    stamp: "s1",
    deleted: false,
  };
  assert.deepEqual(wireRevision(entry, "phone-1"), {
    id: "u1", study_id: "s", tag_id: "T1", event: "new",
    revision: { parents: ["0123456789abcdef0123456789abcdef"], stamp: "s1", device: "phone-1", deleted: false },
  });
  assert.deepEqual(wireRevision({ ...entry, parent: null, deleted: true }, "p").revision.parents, []);
});

test("the phone keeps the descendant, else the merge order", () => {
  const a = { id: "c", revision: { id: "a1", depth: 1, stamp: "1" } };
  const b = { id: "c", revision: { id: "b2", parents: ["a1"], depth: 2, stamp: "0", deleted: true } };
  assert.equal(pickRevision(a, b), b, "a deletion that edits what the phone holds wins");
  assert.equal(pickRevision(b, a), b, "an ancestor never replaces its descendant");
  assert.equal(pickRevision(undefined, a), a);
  const x = { id: "c", revision: { id: "x", parents: ["a1"], depth: 2, stamp: "5" } };
  const y = { id: "c", revision: { id: "y", parents: ["a1"], depth: 2, stamp: "6" } };
  assert.equal(pickRevision(x, y), y, "concurrent edits: later stamp");
  assert.equal(pickRevision(y, x), y);
  const z = { id: "c", revision: { id: "z", parents: ["a1"], depth: 2, stamp: "9", deleted: true } };
  assert.equal(pickRevision(x, z), x, "concurrent edits: live before deleted");
});
