// Package sync merges capture records between replicas (phones, the
// base-camp server, the program office) so that every replica converges to
// the same records and no accepted write is ever lost.
//
// # Revisions
//
// Every edit of a record is a revision naming its parent revisions (none
// for the first version, one for an edit, all the leaves for a
// resolution). Its ID is a hash of (sorted parents, canonical body, deleted
// flag), see RevisionID and CanonicalBody, so the same edit sent twice, or
// made on two devices, is one revision. Deletes are tombstone revisions.
// Every revision ever accepted is kept (History).
//
// # Merge rule
//
// Ancestry decides, clocks only order. Revisions of one record that do not
// descend from each other are all kept as leaves; a record with more than
// one leaf is a conflict (capture.Revision.Conflict on the stored record).
// The capture store holds the provisional winner among the leaves, chosen
// the same way on every replica: live before deleted, then the longer
// history (Depth), then the later hybrid logical clock stamp, then the
// greater revision ID. The coordinator ends a conflict with Resolve: a
// revision whose parents are all the leaves. If one revision reaches a
// replica with two different stamps (two devices made the very same edit)
// the smaller stamp is kept everywhere.
//
// # Clocks
//
// Stamps come from a hybrid logical clock (Clock; Kulkarni et al. 2014).
// A received stamp more than MaxAhead in the future is kept on its
// revision (so all replicas order alike) but the server clock does not
// follow it, and the push result carries a warning. A device clock that is
// wrong by years changes the provisional order of its concurrent edits,
// never which edits are kept.
//
// # Change feed, cursors, epochs
//
// The transaction that stores a revision also takes the next feed
// sequence number (bbolt NextSequence) and indexes seq -> revision. Pull
// returns the revisions after a cursor (epoch, seq) in pages; a page is
// one read transaction, and sequence numbers are taken inside serialised
// write transactions, so paging while others write never skips a change.
// The epoch is random and kept in the data file; Open makes a new one when
// the file may have been restored from a backup (see Open), and clients
// that see a new epoch resync in full, which is safe because re-applying a
// revision changes nothing.
//
// # Push, pull and peers
//
// A push (DecodePush, Engine.Push) is at most MaxPushRevisions revisions
// and MaxPushBytes bytes, applied in one transaction in dependency order;
// each revision gets a Result (stored, already had, rejected with a reason,
// Retry when only a parent is missing) and the reply is sent after the
// commit, so a client clears its outbox only for confirmed revisions.
// Sync does not apply the study's field rules to pushed revisions (another
// replica accepted them; refusing would split replicas); it refuses only
// what would corrupt the store or the ancestry. Local edits (Create,
// Update, Delete, Resolve) are validated by the capture store.
//
// Server-to-server sync (SyncPeer) uses the phone endpoints: it pulls
// pages, each stored in one transaction with the pull cursor (never ahead
// of its data), then pushes its own feed, writing the push checkpoint only
// after the peer confirmed the page. An interrupted run resumes from the
// checkpoints; re-sent revisions come back "already had".
//
// # Storage
//
// The engine keeps its buckets in the capture store's bbolt file (through
// capture.Tx.Bucket), in the same transaction as the capture record it
// changes: revisions (header + canonical body), per-record study and
// leaves, the feed, and metadata (replica ID, epoch, peer checkpoints,
// per-sender counts). The merge rule is written once against a small
// transaction interface; the tests run it both on bbolt and on maps (the
// seeded convergence simulation).
//
// # Speed
//
// A push is read in one pass that finds each revision's JSON; revisions of
// the plain shape phones send are decoded without reflection
// (decodeCaptureFast; anything else goes to encoding/json, which decides),
// and decoding and checking IDs run on all cores before the write
// transaction. In that transaction each new revision costs two lookups
// (its record's state, the capture store's record) and five writes: the
// revision, the record's state, the feed entry, and the capture store's
// record and tag-index entry. That, not decoding, bounds the merge rate.
// BenchmarkWriteFloors measures the bound: with every key and value
// encoded in advance, the capture store's operations alone run at about
// 0.52-0.57 of a raw bbolt insert of the same records, and the whole
// layout's at about 0.31-0.33; the real merge reached 0.15-0.24 in runs
// on a shared 2-core machine (BenchmarkSync100k, merge/raw), roughly two
// thirds of its layout's floor.
//
// Fault points for crash tests are described in fault.go.
package sync
