#!/usr/bin/env python3
"""Independent computation of a revision ID (sync.RevisionID) for the test
vector in canonical_test.go, with Python's json and hashlib instead of the
Go code. Run: python3 revid_vector.py > revid_vector.txt

Canonical body: the capture without "revision", empty values ("", 0,
false, null, [], {}) left out, keys sorted, no whitespace, non-ASCII kept
as UTF-8, integral numbers written without a fraction (as JSON.stringify
does), times in UTC."""
import hashlib
import json

capture = {
    "id": "01890a5d-ac96-774b-bcce-b302099a8057",
    "study_id": "fen-grid-2025",
    "occasion": 2,
    "occasion_set_by_hand": False,
    "station_id": "A1",
    "tag_id": "BF-0042",
    "old_tag_id": "",
    "event": "recapture",
    "species": "bank vole",
    "sex": "female",
    "age": "adult",
    "mass_g": 23.5,
    "measurements": [{"name": "hind foot", "value": 17.25, "unit": "mm"},
                     {"name": "tail", "value": 40.0, "unit": "mm"}],
    "fate": "released",
    "observer": "crew 3",
    "device": "phone-7",
    "captured_at": "2025-06-03T05:10:00.5Z",
    "lat": -41.2865,
    "lon": 174.7762,
    "accuracy_m": 4.0,
    "notes": "ear nick \"left\"; <ok> & fine\tstill \u00e9tourdi",
}
parents = ["ffeeddccbbaa99887766554433221100", "00112233445566778899aabbccddeeff"]
deleted = False


def prune(v):
    if isinstance(v, dict):
        out = {k: prune(x) for k, x in v.items()}
        return {k: x for k, x in out.items() if not empty(x)}
    if isinstance(v, list):
        return [prune(x) for x in v]
    if isinstance(v, float) and v.is_integer():
        return int(v)
    return v


def empty(v):
    return v in ("", 0, False, None) or v == [] or v == {}


body = json.dumps(prune(capture), sort_keys=True, separators=(",", ":"), ensure_ascii=False)
h = hashlib.sha256()
h.update(b"tagtally revision 1\n")
h.update(",".join(sorted(parents)).encode())
h.update(b"\n1\n" if deleted else b"\n0\n")
h.update(body.encode("utf-8"))
print(body)
print(h.hexdigest()[:32])
