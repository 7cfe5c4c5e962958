package demo

import (
	"fmt"
	"math"
	"math/rand/v2"
	"sort"
	"time"

	"github.com/google/uuid"

	"tagtally/capture"
)

// StudyID is the ID of the demonstration study.
const StudyID = "demo-quillmoor-2026"

// Species is the species code used in the demo records.
const Species = "Apodemus sylvaticus"

// The scenario's fixed settings. They are the simulation's "truth", which a
// test may compare estimates against.
const (
	// TrueN is the number of animals with a home-range centre in the
	// simulated area (the grid plus a Buffer-wide strip around it).
	TrueN = 260
	// GridSide is the number of stations along each side of the grid.
	GridSide = 8
	// SpacingM is the distance between neighbouring stations in metres.
	SpacingM = 15.0
	// Occasions is the number of trap nights.
	Occasions = 8
	// BufferM is the width of the strip around the grid where home-range
	// centres may lie: animals living just outside still visit edge traps.
	BufferM = 30.0
	// SigmaM is the spatial scale of the half-normal hazard, in metres.
	SigmaM = 13.0
	// seed fixes the simulation; change it and every record changes.
	seed = 20260608
)

// Cautions is the text crews see before handling animals in the demo study.
const Cautions = `This is an invented demonstration study; no animals were handled.
In a real study: trap, handle, mark and release wild animals only under the
permits your jurisdiction requires and with your institution's animal-welfare
(ethics) approval. Only trained handlers should take animals in hand; others
record. Check traps early, give traps bedding and food, and keep handling
short. Follow local rules and licensed veterinary advice over anything in
this program; when in doubt, release the animal.`

// Crew members and their phones (all invented).
var crew = []struct{ observer, device string }{
	{"Ines Marrow", "phone-ines"},
	{"Tobiah Quell", "phone-tobiah"},
	{"Runa Ketterby", "phone-runa"},
}

// animal is one simulated individual.
type animal struct {
	x, y    float64 // home-range centre, metres in grid coordinates
	lambda0 float64 // hazard of entering a trap at its centre, per night
	sex     capture.Sex
	age     capture.AgeClass
	massG   float64
	footMM  float64
	tag     string // current tag, "" until first caught
	caught  bool
	dead    bool
	records []int // indices into the capture slice
}

// Build returns the demo study and its capture records, the same on every
// call. The records are sorted by capture time.
func Build() (*capture.Study, []capture.Capture) {
	st := buildStudy()
	caps := simulate(st)
	return st, caps
}

func buildStudy() *capture.Study {
	first := time.Date(2026, 6, 8, 16, 0, 0, 0, time.UTC)
	st := &capture.Study{
		ID:            StudyID,
		Name:          "Quillmoor Heath grid N: wood mouse live-trapping, June 2026 (demo)",
		TargetSpecies: []string{Species},
		Design:        capture.DesignClosed,
		AreaHectares:  (GridSide - 1) * SpacingM * (GridSide - 1) * SpacingM / 10000,
		TagSeries:     []capture.TagSeries{{Name: "QH ear tags", Pattern: `QH-[0-9]{4}`}},
		Measurements:  []capture.MeasurementSpec{{Name: "hind foot", Unit: "mm"}},
		MassRanges:    []capture.MassRange{{Species: Species, MinG: 8, MaxG: 40}},
		Cautions:      Cautions,
		PermitRef:     "DEMO-0000 (invented; no permit exists)",
		CreatedBy:     "Ines Marrow (invented crew lead)",
		CreatedAt:     time.Date(2026, 6, 1, 9, 0, 0, 0, time.UTC),
	}
	// Traps are set in the afternoon and checked from 06:00 next morning.
	for k := 1; k <= Occasions; k++ {
		start := first.AddDate(0, 0, k-1)
		st.Occasions = append(st.Occasions, capture.Occasion{
			Index: k, Start: start, End: start.Add(20 * time.Hour),
		})
	}
	for r := 0; r < GridSide; r++ {
		for c := 0; c < GridSide; c++ {
			x, y := float64(c)*SpacingM, float64(r)*SpacingM
			st.Stations = append(st.Stations, capture.Station{
				ID:    stationID(r, c),
				Label: fmt.Sprintf("row %c, trap %d", 'A'+r, c+1),
				Kind:  capture.StationTrap,
				GridX: &x,
				GridY: &y,
			})
		}
	}
	return st
}

func stationID(row, col int) string { return fmt.Sprintf("%c%d", 'A'+row, col+1) }

// simulate runs the trapping with the fixed seed and returns the records,
// deliberate problems included.
func simulate(st *capture.Study) []capture.Capture {
	rng := rand.New(rand.NewPCG(seed, seed^0x9e3779b97f4a7c15))
	const (
		baseLambda   = 0.10 // hazard at the centre for a typical animal, per night
		heterogenSD  = 0.7  // SD of log catchability between animals
		trapHappy    = 1.7  // hazard multiplier once an animal has been caught
		pDieInTrap   = 0.012
		pRetag       = 0.025 // a torn or unreadable ear tag at a recapture
		span         = (GridSide - 1) * SpacingM
		minutesAtBox = 3
	)
	animals := make([]*animal, TrueN)
	for i := range animals {
		a := &animal{
			x:       -BufferM + rng.Float64()*(span+2*BufferM),
			y:       -BufferM + rng.Float64()*(span+2*BufferM),
			lambda0: baseLambda * math.Exp(heterogenSD*rng.NormFloat64()-heterogenSD*heterogenSD/2),
			sex:     capture.SexFemale,
			age:     capture.AgeAdult,
		}
		if rng.Float64() < 0.5 {
			a.sex = capture.SexMale
		}
		switch u := rng.Float64(); {
		case u < 0.12:
			a.age, a.massG, a.footMM = capture.AgeJuvenile, 12+2*rng.NormFloat64(), 20+0.6*rng.NormFloat64()
		case u < 0.32:
			a.age, a.massG, a.footMM = capture.AgeSubadult, 17+2*rng.NormFloat64(), 21.5+0.6*rng.NormFloat64()
		default:
			a.massG, a.footMM = 23+3*rng.NormFloat64(), 22.5+0.7*rng.NormFloat64()
		}
		animals[i] = a
	}

	var caps []capture.Capture
	nextTag := 1
	newTag := func() string { t := fmt.Sprintf("QH-%04d", nextTag); nextTag++; return t }
	for k := 1; k <= Occasions; k++ {
		occ := st.Occasions[k-1]
		occupied := make([]bool, len(st.Stations))
		// Animals move about in a random order each night; the first into
		// a trap holds it.
		order := rng.Perm(len(animals))
		type catch struct {
			a       *animal
			station int
		}
		var night []catch
		hz := make([]float64, len(st.Stations))
		for _, i := range order {
			a := animals[i]
			if a.dead {
				continue
			}
			lam := a.lambda0
			if a.caught {
				lam *= trapHappy
			}
			var total float64
			for j, s := range st.Stations {
				hz[j] = 0
				if occupied[j] {
					continue
				}
				dx, dy := *s.GridX-a.x, *s.GridY-a.y
				hz[j] = lam * math.Exp(-(dx*dx+dy*dy)/(2*SigmaM*SigmaM))
				total += hz[j]
			}
			if total == 0 || rng.Float64() >= 1-math.Exp(-total) {
				continue
			}
			u, j := rng.Float64()*total, 0
			for ; j < len(hz)-1; j++ {
				if u < hz[j] {
					break
				}
				u -= hz[j]
			}
			occupied[j] = true
			night = append(night, catch{a, j})
		}
		// The crew checks the grid in station order; rows A-C, D-F and G-H
		// each have their own handler.
		sort.Slice(night, func(x, y int) bool { return night[x].station < night[y].station })
		morning := occ.Start.Add(14 * time.Hour) // 06:00
		for _, c := range night {
			a := c.a
			row, col := c.station/GridSide, c.station%GridSide
			who := crew[min(row/3, len(crew)-1)]
			within := (row%3)*GridSide + col
			at := morning.Add(time.Duration(within*minutesAtBox)*time.Minute + time.Duration(rng.IntN(120))*time.Second)
			rec := capture.Capture{
				StudyID:    st.ID,
				Occasion:   k,
				StationID:  st.Stations[c.station].ID,
				Species:    Species,
				Sex:        a.sex,
				Age:        a.age,
				Observer:   who.observer,
				Device:     who.device,
				CapturedAt: at,
				Fate:       capture.FateReleased,
			}
			switch {
			case !a.caught:
				a.tag = newTag()
				rec.Event, rec.TagID = capture.EventNewMark, a.tag
			case rng.Float64() < pRetag:
				rec.Event, rec.OldTagID = capture.EventRetag, a.tag
				a.tag = newTag()
				rec.TagID = a.tag
				rec.Notes = "old tag torn; retagged other ear"
			default:
				rec.Event, rec.TagID = capture.EventRecapture, a.tag
			}
			a.caught = true
			mass := math.Round((a.massG+0.8*rng.NormFloat64())*2) / 2
			rec.MassG = &mass
			foot := math.Round((a.footMM+0.3*rng.NormFloat64())*10) / 10
			rec.Measurements = []capture.Measurement{{Name: "hind foot", Value: foot, Unit: "mm"}}
			if rng.Float64() < pDieInTrap {
				a.dead = true
				rec.Fate = capture.FateDied
				rec.Notes = "found dead in trap"
			}
			rec.ID = uuidV7(rng, at)
			a.records = append(a.records, len(caps))
			caps = append(caps, rec)
		}
	}
	caps = addProblems(rng, animals, caps)
	sort.SliceStable(caps, func(i, j int) bool { return caps[i].CapturedAt.Before(caps[j].CapturedAt) })
	return caps
}

// Notes that mark the deliberate problems, so tests and curious users can
// find them.
const (
	NoteUnknownTag = "tag hard to read in the rain"
	NoteNoStation  = "station label missing on the paper sheet"
	NoteHeavy      = "weighed in the bag (pesola)"
	NoteDuplicate  = "entered again on a second phone"
	NoteSexFlip    = "sexed by a new handler"
)

// UnknownTag is the tag of the recapture whose tag was never marked.
const UnknownTag = "QH-0913"

// addProblems plants the deliberate data problems into the simulated
// records. Each changes or adds one record and marks it with a note.
func addProblems(rng *rand.Rand, animals []*animal, caps []capture.Capture) []capture.Capture {
	// Animals caught at least three times, in a fixed order.
	var often []*animal
	for _, a := range animals {
		if len(a.records) >= 3 && !a.dead {
			often = append(often, a)
		}
	}
	pick := func(n int) *animal { return often[n%len(often)] }

	// A recapture of a tag that was never marked, at station C4.
	base := caps[pick(0).records[1]]
	ghost := base
	ghost.TagID, ghost.Event, ghost.Notes = UnknownTag, capture.EventRecapture, NoteUnknownTag
	ghost.Measurements = nil
	ghost.CapturedAt = base.CapturedAt.Add(17 * time.Second)
	ghost.StationID = "C4"
	ghost.ID = uuidV7(rng, ghost.CapturedAt)
	caps = append(caps, ghost)

	// A sex recorded differently on one recapture.
	flip := &caps[pick(1).records[2]]
	if flip.Sex == capture.SexFemale {
		flip.Sex = capture.SexMale
	} else {
		flip.Sex = capture.SexFemale
	}
	flip.Notes = NoteSexFlip

	// A capture whose station was not written down.
	nost := &caps[pick(2).records[1]]
	nost.StationID, nost.Notes = "", NoteNoStation

	// A mass with a slipped decimal point: 212 g for a 21.2 g mouse.
	heavy := &caps[pick(3).records[1]]
	m := 212.0
	heavy.MassG, heavy.Notes = &m, NoteHeavy

	// The same capture entered on two phones a few minutes apart.
	orig := caps[pick(4).records[2]]
	dup := orig
	other := crew[0]
	if orig.Device == other.device {
		other = crew[1]
	}
	dup.Observer, dup.Device, dup.Notes = other.observer, other.device, NoteDuplicate
	dup.CapturedAt = orig.CapturedAt.Add(4*time.Minute + 10*time.Second)
	dup.Measurements = append([]capture.Measurement(nil), orig.Measurements...)
	dup.ID = uuidV7(rng, dup.CapturedAt)
	caps = append(caps, dup)
	return caps
}

// uuidV7 makes a version-7 UUID (RFC 9562, section 5.7) whose time field
// is t and whose random bits come from rng, so the demo's IDs are the same
// on every build and still sort by capture time.
func uuidV7(rng *rand.Rand, t time.Time) string {
	var b uuid.UUID
	ms := uint64(t.UnixMilli())
	for i := 0; i < 6; i++ {
		b[i] = byte(ms >> (40 - 8*i))
	}
	for i := 6; i < 16; i++ {
		b[i] = byte(rng.Uint32())
	}
	b[6] = 0x70 | b[6]&0x0f
	b[8] = 0x80 | b[8]&0x3f
	return b.String()
}
