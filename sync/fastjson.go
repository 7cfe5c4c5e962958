package sync

import (
	"strconv"
	"unicode/utf8"

	"tagtally/capture"
)

// decodeCaptureFast decodes one pushed revision, the JSON object text,
// into c (which must be zero) without reflection, when the text has the
// plain shape phones and peers send: only capture.Capture's own member
// names, each once, spelt exactly as its JSON tag; strings without escape
// sequences; no nulls. It reports false whenever it is not certain to
// produce what encoding/json would (any other shape, anything
// encoding/json would refuse, a number that does not parse); c is then to
// be thrown away and the text decoded with encoding/json, which decides.
// So it can only be faster, never different: FuzzDecodeCaptureFast and
// TestDecodeCaptureFastKnowsEveryField hold it to that.
//
// Decoding with encoding/json costs about 8 microseconds per revision
// (reflection, field lookup by folded name, an allocation per string);
// this costs a fraction of that and is most of what makes a push of 500
// revisions cheaper to read than to store.
func decodeCaptureFast(text []byte, c *capture.Capture) bool {
	d := fastDec{b: text}
	var seen uint32
	ok := d.object(func(key []byte) bool {
		f, known := captureFields[string(key)]
		if !known || seen&(1<<f) != 0 {
			return false
		}
		seen |= 1 << f
		return d.captureField(f, c)
	})
	d.space()
	return ok && d.i == len(d.b)
}

// Member numbers of capture.Capture (bits of a seen-mask).
const (
	fID = iota
	fStudyID
	fOccasion
	fOccasionSetByHand
	fStationID
	fTagID
	fOldTagID
	fEvent
	fSpecies
	fSex
	fAge
	fMassG
	fMeasurements
	fFate
	fObserver
	fDevice
	fCapturedAt
	fLat
	fLon
	fAccuracyM
	fNotes
	fRevision
)

var captureFields = map[string]int{
	"id": fID, "study_id": fStudyID, "occasion": fOccasion, "occasion_set_by_hand": fOccasionSetByHand,
	"station_id": fStationID, "tag_id": fTagID, "old_tag_id": fOldTagID, "event": fEvent,
	"species": fSpecies, "sex": fSex, "age": fAge, "mass_g": fMassG, "measurements": fMeasurements,
	"fate": fFate, "observer": fObserver, "device": fDevice, "captured_at": fCapturedAt,
	"lat": fLat, "lon": fLon, "accuracy_m": fAccuracyM, "notes": fNotes, "revision": fRevision,
}

// Members of capture.Revision and capture.Measurement.
var revisionFields = map[string]int{"id": 0, "parents": 1, "depth": 2, "stamp": 3, "device": 4, "deleted": 5, "conflict": 6}
var measurementFields = map[string]int{"name": 0, "value": 1, "unit": 2}

func (d *fastDec) captureField(f int, c *capture.Capture) bool {
	var ok bool
	switch f {
	case fID:
		c.ID, ok = d.str()
	case fStudyID:
		c.StudyID, ok = d.str()
	case fOccasion:
		c.Occasion, ok = d.int()
	case fOccasionSetByHand:
		c.OccasionSetByHand, ok = d.bool()
	case fStationID:
		c.StationID, ok = d.str()
	case fTagID:
		c.TagID, ok = d.str()
	case fOldTagID:
		c.OldTagID, ok = d.str()
	case fEvent:
		var s string
		s, ok = d.str()
		c.Event = capture.Event(s)
	case fSpecies:
		c.Species, ok = d.str()
	case fSex:
		var s string
		s, ok = d.str()
		c.Sex = capture.Sex(s)
	case fAge:
		var s string
		s, ok = d.str()
		c.Age = capture.AgeClass(s)
	case fMassG:
		c.MassG, ok = d.floatPtr()
	case fMeasurements:
		c.Measurements, ok = d.measurements()
	case fFate:
		var s string
		s, ok = d.str()
		c.Fate = capture.Fate(s)
	case fObserver:
		c.Observer, ok = d.str()
	case fDevice:
		c.Device, ok = d.str()
	case fCapturedAt:
		// encoding/json hands the quoted text to time.Time.UnmarshalJSON.
		start := d.i
		if _, ok = d.rawStr(); ok {
			ok = c.CapturedAt.UnmarshalJSON(d.b[start:d.i]) == nil
		}
	case fLat:
		c.Lat, ok = d.floatPtr()
	case fLon:
		c.Lon, ok = d.floatPtr()
	case fAccuracyM:
		c.AccuracyM, ok = d.floatPtr()
	case fNotes:
		c.Notes, ok = d.str()
	case fRevision:
		ok = d.revision(&c.Revision)
	}
	return ok
}

func (d *fastDec) revision(r *capture.Revision) bool {
	var seen uint32
	return d.object(func(key []byte) bool {
		f, known := revisionFields[string(key)]
		if !known || seen&(1<<f) != 0 {
			return false
		}
		seen |= 1 << f
		var ok bool
		switch f {
		case 0:
			r.ID, ok = d.str()
		case 1:
			r.Parents, ok = d.strings()
		case 2:
			r.Depth, ok = d.int()
		case 3:
			r.Stamp, ok = d.str()
		case 4:
			r.Device, ok = d.str()
		case 5:
			r.Deleted, ok = d.bool()
		case 6:
			r.Conflict, ok = d.bool()
		}
		return ok
	})
}

func (d *fastDec) measurements() ([]capture.Measurement, bool) {
	ms := []capture.Measurement{} // encoding/json makes [] an empty, non-nil slice
	ok := d.array(func() bool {
		var m capture.Measurement
		var seen uint32
		ok := d.object(func(key []byte) bool {
			f, known := measurementFields[string(key)]
			if !known || seen&(1<<f) != 0 {
				return false
			}
			seen |= 1 << f
			var ok bool
			switch f {
			case 0:
				m.Name, ok = d.str()
			case 1:
				m.Value, ok = d.float()
			case 2:
				m.Unit, ok = d.str()
			}
			return ok
		})
		ms = append(ms, m)
		return ok
	})
	return ms, ok
}

func (d *fastDec) strings() ([]string, bool) {
	ss := []string{}
	ok := d.array(func() bool {
		s, ok := d.str()
		ss = append(ss, s)
		return ok
	})
	return ss, ok
}

// fastDec reads JSON text; every method reports false on anything it does
// not handle.
type fastDec struct {
	b []byte
	i int
}

func (d *fastDec) space() {
	for d.i < len(d.b) {
		switch d.b[d.i] {
		case ' ', '\t', '\n', '\r':
			d.i++
		default:
			return
		}
	}
}

func (d *fastDec) eat(c byte) bool {
	d.space()
	if d.i < len(d.b) && d.b[d.i] == c {
		d.i++
		return true
	}
	return false
}

// object reads {"key": value, ...}; member is called with each key
// (without quotes) and must read the value.
func (d *fastDec) object(member func(key []byte) bool) bool {
	if !d.eat('{') {
		return false
	}
	if d.eat('}') {
		return true
	}
	for {
		d.space()
		key, ok := d.rawStr()
		if !ok || !d.eat(':') {
			return false
		}
		d.space()
		if !member(key[1 : len(key)-1]) {
			return false
		}
		if d.eat(',') {
			continue
		}
		return d.eat('}')
	}
}

// array reads [value, ...]; elem reads one value.
func (d *fastDec) array(elem func() bool) bool {
	if !d.eat('[') {
		return false
	}
	if d.eat(']') {
		return true
	}
	for {
		d.space()
		if !elem() {
			return false
		}
		if d.eat(',') {
			continue
		}
		return d.eat(']')
	}
}

// rawStr reads a string without escapes or control characters and returns
// it with its quotes; invalid UTF-8 (which encoding/json replaces) is
// refused.
func (d *fastDec) rawStr() ([]byte, bool) {
	d.space()
	if d.i >= len(d.b) || d.b[d.i] != '"' {
		return nil, false
	}
	start := d.i
	ascii := true
	for d.i++; d.i < len(d.b); d.i++ {
		switch c := d.b[d.i]; {
		case c == '"':
			d.i++
			s := d.b[start:d.i]
			return s, ascii || utf8.Valid(s)
		case c == '\\' || c < 0x20:
			return nil, false
		case c >= utf8.RuneSelf:
			ascii = false
		}
	}
	return nil, false
}

func (d *fastDec) str() (string, bool) {
	s, ok := d.rawStr()
	if !ok {
		return "", false
	}
	return string(s[1 : len(s)-1]), true
}

func (d *fastDec) bool() (bool, bool) {
	d.space()
	switch {
	case d.literal("true"):
		return true, true
	case d.literal("false"):
		return false, true
	}
	return false, false
}

// literal reads word if it is next and ends there.
func (d *fastDec) literal(word string) bool {
	end := d.i + len(word)
	if end > len(d.b) || string(d.b[d.i:end]) != word || (end < len(d.b) && !delimiter(d.b[end])) {
		return false
	}
	d.i = end
	return true
}

func delimiter(c byte) bool {
	switch c {
	case ' ', '\t', '\n', '\r', ',', '}', ']':
		return true
	}
	return false
}

// number reads a number in JSON's grammar and returns its text.
func (d *fastDec) number() ([]byte, bool) {
	d.space()
	b, i := d.b, d.i
	start := i
	digits := func() bool {
		n := i
		for i < len(b) && b[i] >= '0' && b[i] <= '9' {
			i++
		}
		return i > n
	}
	if i < len(b) && b[i] == '-' {
		i++
	}
	switch {
	case i < len(b) && b[i] == '0':
		i++
	case !digits():
		return nil, false
	}
	if i < len(b) && b[i] == '.' {
		i++
		if !digits() {
			return nil, false
		}
	}
	if i < len(b) && (b[i] == 'e' || b[i] == 'E') {
		i++
		if i < len(b) && (b[i] == '+' || b[i] == '-') {
			i++
		}
		if !digits() {
			return nil, false
		}
	}
	if i < len(b) && !delimiter(b[i]) {
		return nil, false
	}
	d.i = i
	return b[start:i], true
}

// int parses as encoding/json does for an int field (strconv.ParseInt of
// the literal, so 1.0 or 1e2 is not an int).
func (d *fastDec) int() (int, bool) {
	lit, ok := d.number()
	if !ok {
		return 0, false
	}
	n, err := strconv.ParseInt(string(lit), 10, strconv.IntSize)
	return int(n), err == nil
}

// float parses as encoding/json does for a float64 field.
func (d *fastDec) float() (float64, bool) {
	lit, ok := d.number()
	if !ok {
		return 0, false
	}
	f, err := strconv.ParseFloat(string(lit), 64)
	return f, err == nil
}

func (d *fastDec) floatPtr() (*float64, bool) {
	f, ok := d.float()
	if !ok {
		return nil, false
	}
	return &f, true
}
