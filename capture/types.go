package capture

import "time"

// Design is how a study samples: one closed period, an open series of
// occasions, or Pollock's robust design (primary periods made of closely
// spaced secondary occasions).
type Design string

const (
	DesignClosed Design = "closed"
	DesignOpen   Design = "open"
	DesignRobust Design = "robust"
)

// Study is one mark-recapture study: its design, its occasions and stations,
// its tag series and the cautions crews see before handling animals.
type Study struct {
	ID            string   `json:"id"`
	Name          string   `json:"name"`
	TargetSpecies []string `json:"target_species"`
	Design        Design   `json:"design"`
	// AreaHectares is the area of the trapping grid or study site, if known.
	AreaHectares float64 `json:"area_ha,omitempty"`
	// TagSeries lists the accepted tag formats, each a regular expression
	// matched against the whole tag ID. Empty means any non-empty tag.
	TagSeries []TagSeries `json:"tag_series,omitempty"`
	// Measurements are the free measurements crews are asked to record.
	Measurements []MeasurementSpec `json:"measurements,omitempty"`
	// MassRanges are plausible mass ranges per species, used by data checks.
	MassRanges []MassRange `json:"mass_ranges,omitempty"`
	// Cautions is shown to every crew member on first use of the study.
	Cautions  string     `json:"cautions,omitempty"`
	PermitRef string     `json:"permit_ref,omitempty"`
	CreatedBy string     `json:"created_by,omitempty"`
	CreatedAt time.Time  `json:"created_at"`
	Occasions []Occasion `json:"occasions"`
	Stations  []Station  `json:"stations"`
}

// TagSeries is one accepted tag format.
type TagSeries struct {
	Name    string `json:"name"`
	Pattern string `json:"pattern"` // Go regular expression, anchored on both ends when checked
}

// MeasurementSpec is a measurement the study asks crews to take.
type MeasurementSpec struct {
	Name string `json:"name"`
	Unit string `json:"unit"`
}

// MassRange is the plausible mass range of a species in grams.
type MassRange struct {
	Species string  `json:"species"`
	MinG    float64 `json:"min_g"`
	MaxG    float64 `json:"max_g"`
}

// Occasion is one sampling occasion. Index starts at 1. In a robust design
// Primary is the primary period (starting at 1) the occasion belongs to;
// otherwise it is 0.
type Occasion struct {
	Index   int       `json:"index"`
	Primary int       `json:"primary,omitempty"`
	Start   time.Time `json:"start"`
	End     time.Time `json:"end"`
}

// StationKind says what sort of sampling point a station is.
type StationKind string

const (
	StationTrap     StationKind = "trap"
	StationNet      StationKind = "net"
	StationTransect StationKind = "transect point"
	StationOther    StationKind = "other"
)

// Station is a trap, net or point. Coordinates are WGS84 degrees and/or grid
// positions in metres; a station may have either or both.
type Station struct {
	ID    string      `json:"id"`
	Label string      `json:"label"`
	Kind  StationKind `json:"kind"`
	Lat   *float64    `json:"lat,omitempty"`
	Lon   *float64    `json:"lon,omitempty"`
	GridX *float64    `json:"grid_x_m,omitempty"`
	GridY *float64    `json:"grid_y_m,omitempty"`
}

// Event is what happened at a capture.
type Event string

const (
	EventNewMark      Event = "new"       // first capture: the animal is marked now
	EventRecapture    Event = "recapture" // caught again, tag read in hand
	EventResight      Event = "resight"   // seen and tag read without capture
	EventRetag        Event = "retag"     // old tag replaced: OldTagID -> TagID
	EventDeadRecovery Event = "dead"      // found dead
)

// Sex of the animal as judged in hand.
type Sex string

const (
	SexFemale  Sex = "female"
	SexMale    Sex = "male"
	SexUnknown Sex = "unknown"
)

// AgeClass of the animal as judged in hand.
type AgeClass string

const (
	AgeJuvenile AgeClass = "juvenile"
	AgeSubadult AgeClass = "subadult"
	AgeAdult    AgeClass = "adult"
	AgeUnknown  AgeClass = "unknown"
)

// Fate is what became of the animal after the capture. Died and removed are
// losses on capture: the animal leaves the population under study.
type Fate string

const (
	FateReleased Fate = "released"
	FateDied     Fate = "died"
	FateRemoved  Fate = "removed"
)

// Measurement is one free measurement, e.g. wing chord 62 mm.
type Measurement struct {
	Name  string  `json:"name"`
	Value float64 `json:"value"`
	Unit  string  `json:"unit"`
}

// Capture is one record of an animal in hand or seen: the unit that phones
// create and that sync merges. ID is a UUID v7 (time-ordered), chosen by
// the device that first wrote the record and never changed.
type Capture struct {
	ID      string `json:"id"`
	StudyID string `json:"study_id"`
	// Occasion is derived from CapturedAt and the study's occasion windows
	// unless OccasionSetByHand is true. 0 means no occasion matched.
	Occasion          int           `json:"occasion"`
	OccasionSetByHand bool          `json:"occasion_set_by_hand,omitempty"`
	StationID         string        `json:"station_id,omitempty"`
	TagID             string        `json:"tag_id"`
	OldTagID          string        `json:"old_tag_id,omitempty"` // retag only
	Event             Event         `json:"event"`
	Species           string        `json:"species,omitempty"`
	Sex               Sex           `json:"sex,omitempty"`
	Age               AgeClass      `json:"age,omitempty"`
	MassG             *float64      `json:"mass_g,omitempty"`
	Measurements      []Measurement `json:"measurements,omitempty"`
	Fate              Fate          `json:"fate,omitempty"`
	Observer          string        `json:"observer,omitempty"`
	Device            string        `json:"device,omitempty"`
	CapturedAt        time.Time     `json:"captured_at"`
	Lat               *float64      `json:"lat,omitempty"`
	Lon               *float64      `json:"lon,omitempty"`
	AccuracyM         *float64      `json:"accuracy_m,omitempty"`
	Notes             string        `json:"notes,omitempty"`
	Revision          Revision      `json:"revision"`
}

// Revision is the version metadata that sync fills in. The capture store
// keeps it with the record so that sync needs no schema change.
type Revision struct {
	// ID is a hash of (parents, canonical body, deleted flag).
	ID string `json:"id,omitempty"`
	// Parents are the revision IDs this one descends from: none for the
	// first version, one for an ordinary edit, several for a resolution.
	Parents []string `json:"parents,omitempty"`
	// Depth is the length of the longest ancestry chain (1 for a first
	// version), used to order concurrent leaves.
	Depth int `json:"depth,omitempty"`
	// Stamp is a hybrid logical clock stamp (Kulkarni et al. 2014),
	// encoded as a sortable string by the sync package.
	Stamp   string `json:"stamp,omitempty"`
	Device  string `json:"device,omitempty"`
	Deleted bool   `json:"deleted,omitempty"`
	// Conflict is true when this record has more than one leaf revision;
	// the stored body is the provisional winner.
	Conflict bool `json:"conflict,omitempty"`
}
