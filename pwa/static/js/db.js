// IndexedDB on the phone. Three object stores:
//   outbox    records saved here that the server has not confirmed (key: id)
//   captures  every record this phone knows, its own and pulled (key: id)
//   meta      small settings: device ID, study, sync cursor, last sync time
// Every save is one IndexedDB transaction that writes the record to both
// captures and outbox, and resolves only when the transaction completes,
// so a record the crew saw as "saved" survives a closed tab or a dead
// battery.

const NAME = "tagtally";
const VERSION = 1;

let dbPromise = null;
let current = null; // the open connection, once dbPromise has resolved

export function open() {
  if (dbPromise) return dbPromise;
  dbPromise = new Promise((resolve, reject) => {
    const req = indexedDB.open(NAME, VERSION);
    req.onupgradeneeded = () => {
      const db = req.result;
      if (!db.objectStoreNames.contains("outbox")) db.createObjectStore("outbox", { keyPath: "id" });
      if (!db.objectStoreNames.contains("captures")) {
        const s = db.createObjectStore("captures", { keyPath: "id" });
        s.createIndex("study", "study_id");
      }
      if (!db.objectStoreNames.contains("meta")) db.createObjectStore("meta");
    };
    req.onsuccess = () => {
      const db = req.result;
      // The browser closes the connection itself when the site's storage
      // is cleared or evicted, and asks it to close for a newer version in
      // another tab: forget it, so the next call opens afresh.
      db.onclose = () => forget(db);
      db.onversionchange = () => {
        db.close();
        forget(db);
      };
      current = db;
      resolve(db);
    };
    req.onerror = () => reject(storageError(req.error));
    req.onblocked = () => reject(new Error("the app is open in another tab with an older version; close it"));
  });
  return dbPromise;
}

function forget(db) {
  if (current === db) {
    current = null;
    dbPromise = null;
  }
}

// transaction opens a transaction, reopening the database once if the
// browser closed the connection under us (storage cleared while the app
// was open): without this the app fails on every later read or save.
async function transaction(stores, mode = "readonly", options) {
  for (let attempt = 0; ; attempt++) {
    const db = await open();
    try {
      return db.transaction(stores, mode, options);
    } catch (e) {
      if (attempt > 0 || e.name !== "InvalidStateError") throw e;
      forget(db);
    }
  }
}

// storageError is what a failed storage call rejects with: always an
// Error. IndexedDB can report a failure with no error object (a request's
// error reaches the transaction's onerror before the transaction's own
// error is set, and the browser clearing storage aborts with none), and
// callers read e.message and e.status.
function storageError(err) {
  return err || new Error("the phone's storage stopped this step (was the app's storage cleared?)");
}

function done(tx) {
  return new Promise((resolve, reject) => {
    tx.oncomplete = () => resolve();
    tx.onerror = (ev) => reject(storageError(ev.target.error || tx.error));
    tx.onabort = () => reject(storageError(tx.error));
  });
}

function result(req) {
  return new Promise((resolve, reject) => {
    req.onsuccess = () => resolve(req.result);
    req.onerror = () => reject(storageError(req.error));
  });
}

export async function getMeta(key) {
  return result((await transaction("meta")).objectStore("meta").get(key));
}

export async function setMeta(key, value) {
  const tx = await transaction("meta", "readwrite");
  tx.objectStore("meta").put(value, key);
  return done(tx);
}

// saveRecord writes the capture and its outbox entry in one transaction.
// Durability "strict" makes the browser report the commit only after the
// data is on disk; with the default, several browsers report it once the
// write is handed to the operating system, and a phone that dies at that
// moment could lose a record the crew saw as saved. Browsers without the
// option ignore it.
export async function saveRecord(capture, entry) {
  const tx = await transaction(["captures", "outbox"], "readwrite", { durability: "strict" });
  tx.objectStore("captures").put(capture);
  tx.objectStore("outbox").put(entry);
  return done(tx);
}

export async function getOutboxEntry(id) {
  return result((await transaction("outbox")).objectStore("outbox").get(id));
}

export async function allOutbox() {
  return result((await transaction("outbox")).objectStore("outbox").getAll());
}

export async function getCapture(id) {
  return result((await transaction("captures")).objectStore("captures").get(id));
}

export async function capturesForStudy(studyID) {
  const idx = (await transaction("captures")).objectStore("captures").index("study");
  return result(idx.getAll(IDBKeyRange.only(studyID)));
}

// applySettled removes confirmed outbox entries, keeps the others updated,
// and records on the local copies the revision the server confirmed
// (revisions: [id, {id, parents, stamp, device, deleted}]), in one
// transaction.
export async function applySettled(confirmIDs, keepEntries, revisions) {
  const tx = await transaction(["captures", "outbox"], "readwrite");
  const out = tx.objectStore("outbox");
  const caps = tx.objectStore("captures");
  for (const id of confirmIDs) out.delete(id);
  for (const e of keepEntries) out.put(e);
  for (const [id, rev] of revisions) {
    const req = caps.get(id);
    req.onsuccess = () => {
      const c = req.result;
      if (c) {
        c.revision = { ...rev };
        caps.put(c);
      }
    };
  }
  return done(tx);
}

// putPulled stores records pulled from the server. pick(held, incoming)
// chooses which revision of a record the phone keeps. A record with an
// unsent local edit in the outbox is left alone: the crew's edit shows on
// the phone until the server has it.
export async function putPulled(records, pick) {
  const tx = await transaction(["captures", "outbox"], "readwrite");
  const out = tx.objectStore("outbox");
  const caps = tx.objectStore("captures");
  for (const r of records) {
    const req = out.get(r.id);
    req.onsuccess = () => {
      if (req.result) return;
      const held = caps.get(r.id);
      held.onsuccess = () => {
        const chosen = pick(held.result, r);
        if (chosen !== held.result) caps.put(chosen);
      };
    };
  }
  return done(tx);
}

// allCaptures lists every record on the phone (for a full resend after
// the server's feed changed epoch).
export async function allCaptures() {
  return result((await transaction("captures")).objectStore("captures").getAll());
}
