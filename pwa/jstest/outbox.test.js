// Unit tests for the outbox rules (common practice for an outbox: clear
// an entry only when the server confirms that exact version). The replies
// have the form the server's push answers with: one result per revision
// sent, in order, {capture_id, revision, status, reason, retry}.
import { test } from "node:test";
import assert from "node:assert/strict";
import { enqueue, batchFrom, settle, waiting } from "../static/js/outbox.js";
import { uuidv7 } from "../static/js/uuid.js";

const R1 = "0123456789abcdef0123456789abcdef";

test("a saved record waits until the server confirms that version", () => {
  const e1 = enqueue(null, { id: "a", tag_id: "T1" }, null, 1000, "s1");
  assert.equal(e1.version, 1);
  assert.equal(e1.parent, null);
  assert.equal(e1.stamp, "s1");
  assert.equal(e1.deleted, false);
  const r = settle([e1], [{ id: "a", version: 1 }], [{ capture_id: "a", status: "stored", revision: R1 }]);
  assert.deepEqual(r.confirm, ["a"]);
  assert.deepEqual(r.revisions, [["a", R1]]);
  assert.equal(r.keep.length, 0);
});

test("already_had confirms too (a resend after a lost reply)", () => {
  const e1 = enqueue(null, { id: "a" }, null, 1000, "s1");
  const r = settle([e1], [{ id: "a", version: 1 }], [{ capture_id: "a", status: "already_had", revision: R1 }]);
  assert.deepEqual(r.confirm, ["a"]);
});

test("an edit made while the first version travelled is not cleared by the old confirmation", () => {
  const e1 = enqueue(null, { id: "a" }, null, 1000, "s1");
  const e2 = enqueue(e1, { id: "a", notes: "fixed" }, null, 2000, "s2");
  assert.equal(e2.version, 2);
  assert.equal(e2.stamp, "s2");
  const r = settle([e2], [{ id: "a", version: 1 }], [{ capture_id: "a", status: "stored", revision: R1 }]);
  assert.deepEqual(r.confirm, []);
  assert.equal(r.keep[0].parent, R1, "the newer body is sent as an edit of the confirmed revision");
  assert.equal(r.keep[0].body.notes, "fixed");
});

test("an edit of a confirmed record names its revision as parent; a delete is flagged", () => {
  const e = enqueue(null, { id: "a", revision: { id: R1, deleted: true } }, R1, 1000, "s1");
  assert.equal(e.parent, R1);
  assert.equal(e.deleted, true);
});

test("a rejected record stays in the outbox with the reason and is not resent until corrected", () => {
  const e1 = enqueue(null, { id: "b" }, null, 1000, "s1");
  const r = settle([e1], [{ id: "b", version: 1 }], [{ capture_id: "b", status: "rejected", reason: "tag ID does not match" }]);
  assert.deepEqual(r.confirm, []);
  assert.equal(r.keep[0].rejected, "tag ID does not match");
  assert.equal(r.keep[0].attempts, 1);
  assert.deepEqual(r.rejected, [{ id: "b", reason: "tag ID does not match" }]);
  assert.equal(waiting(r.keep).length, 0);
  const fixed = enqueue(r.keep[0], { id: "b", tag_id: "T2" }, null, 2000, "s2");
  assert.equal(fixed.rejected, undefined);
  assert.equal(waiting([fixed]).length, 1);
});

test("a rejection the server may lift (retry) keeps the record waiting", () => {
  const e1 = enqueue(null, { id: "c" }, R1, 1000, "s1");
  const r = settle([e1], [{ id: "c", version: 1 }], [{ capture_id: "c", status: "rejected", reason: "parent missing", retry: true }]);
  assert.deepEqual(r.confirm, []);
  assert.deepEqual(r.rejected, []);
  assert.equal(waiting(r.keep).length, 1);
});

test("results are matched by position, and a result naming another record clears nothing", () => {
  const a = enqueue(null, { id: "a" }, null, 1000, "s1");
  const b = enqueue(null, { id: "b" }, null, 1001, "s2");
  const sent = [{ id: "a", version: 1 }, { id: "b", version: 1 }];
  const r = settle([a, b], sent, [
    { capture_id: "a", status: "rejected", reason: "bad" },
    { capture_id: "b", status: "stored", revision: R1 },
  ]);
  assert.deepEqual(r.confirm, ["b"]);
  const wrong = settle([a, b], sent, [{ capture_id: "b", status: "stored", revision: R1 }]);
  assert.deepEqual(wrong.confirm, []);
});

test("batches are oldest first and bounded", () => {
  const es = [3, 1, 2].map((t) => enqueue(null, { id: `r${t}` }, null, t * 1000, "s"));
  assert.deepEqual(batchFrom(es, 2).map((e) => e.id), ["r1", "r2"]);
});

test("uuidv7 puts the time first and sets version and variant", () => {
  const id = uuidv7(0x0123456789ab, (n) => new Uint8Array(n).fill(0xff));
  assert.equal(id, "01234567-89ab-7fff-bfff-ffffffffffff");
  assert.match(uuidv7(), /^[0-9a-f]{8}-[0-9a-f]{4}-7[0-9a-f]{3}-[89ab][0-9a-f]{3}-[0-9a-f]{12}$/);
});

test("no reply for a record means it stays", () => {
  const e1 = enqueue(null, { id: "c" }, null, 1000, "s1");
  const r = settle([e1], [{ id: "c", version: 1 }], []);
  assert.deepEqual(r.confirm, []);
  assert.deepEqual(r.keep, []);
});
