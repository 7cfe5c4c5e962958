import { test } from "node:test";
import assert from "node:assert/strict";
import { enqueue, batchFrom, settle } from "../static/js/outbox.js";
import { uuidv7 } from "../static/js/uuid.js";

test("a saved record waits until the server confirms that version", () => {
  const e1 = enqueue(null, { id: "a", tag_id: "T1" }, null, 1000);
  assert.equal(e1.version, 1);
  assert.equal(e1.parent, null);
  const r = settle([e1], new Map([["a", 1]]), [{ id: "a", status: "stored", revision: "r1" }]);
  assert.deepEqual(r.confirm, ["a"]);
  assert.equal(r.keep.length, 0);
});

test("an edit made while the first version travelled is not cleared by the old confirmation", () => {
  const e1 = enqueue(null, { id: "a" }, null, 1000);
  const e2 = enqueue(e1, { id: "a", notes: "fixed" }, null, 2000);
  assert.equal(e2.version, 2);
  const r = settle([e2], new Map([["a", 1]]), [{ id: "a", status: "stored", revision: "r1" }]);
  assert.deepEqual(r.confirm, []);
  assert.equal(r.keep[0].parent, "r1");
  assert.equal(r.keep[0].body.notes, "fixed");
});

test("a rejected record stays in the outbox with the reason", () => {
  const e1 = enqueue(null, { id: "b" }, null, 1000);
  const r = settle([e1], new Map([["b", 1]]), [{ id: "b", status: "rejected", reason: "tag ID does not match" }]);
  assert.deepEqual(r.confirm, []);
  assert.equal(r.keep[0].rejected, "tag ID does not match");
  assert.equal(r.keep[0].attempts, 1);
  assert.equal(r.rejected.length, 1);
});

test("no reply for a record means it stays", () => {
  const e1 = enqueue(null, { id: "c" }, null, 1000);
  const r = settle([e1], new Map([["c", 1]]), []);
  assert.deepEqual(r.confirm, []);
});

test("batches go oldest first and are capped", () => {
  const es = [3, 1, 2].map((t) => enqueue(null, { id: String(t) }, null, t * 1000));
  assert.deepEqual(batchFrom(es, 2).map((e) => e.id), ["1", "2"]);
});

test("UUID v7 layout (RFC 9562, section 5.7)", () => {
  const zero = (n) => new Uint8Array(n);
  const id = uuidv7(0x0123456789ab, zero);
  assert.equal(id, "01234567-89ab-7000-8000-000000000000");
  assert.match(uuidv7(), /^[0-9a-f]{8}-[0-9a-f]{4}-7[0-9a-f]{3}-[89ab][0-9a-f]{3}-[0-9a-f]{12}$/);
});
