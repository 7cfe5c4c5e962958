package export

import (
	"strconv"
	"strings"

	"tagtally/capture"
)

// CaptureColumns is the fixed column order of the captures sheet and CSV,
// pinned by a golden test: importing a file with these headers restores
// the records exactly.
var CaptureColumns = []Column{
	{Header: "id", Width: 38},
	{Header: "study_id", Width: 14},
	{Header: "occasion", Kind: Integer},
	{Header: "occasion_set_by_hand"},
	{Header: "station_id"},
	{Header: "tag_id", Width: 12},
	{Header: "old_tag_id", Width: 12},
	{Header: "event"},
	{Header: "species", Width: 20},
	{Header: "sex"},
	{Header: "age"},
	{Header: "mass_g", Kind: Number},
	{Header: "fate"},
	{Header: "observer", Width: 14},
	{Header: "device", Width: 16},
	{Header: "captured_at", Kind: Date},
	{Header: "lat", Kind: Number, Width: 12},
	{Header: "lon", Kind: Number, Width: 12},
	{Header: "accuracy_m", Kind: Number},
	{Header: "measurements", Width: 24},
	{Header: "notes", Width: 30},
	{Header: "deleted"},
	{Header: "revision_id", Width: 20},
}

// CapturesSheet lists every record, one row each. each calls its
// function once per capture in the order to be written; it lets the
// caller stream records from the store.
func CapturesSheet(each func(fn func(c *capture.Capture) error) error) Sheet {
	return Sheet{
		Name:    "Captures",
		Columns: CaptureColumns,
		Stream:  true,
		Rows: func(emit func([]any) error) error {
			row := make([]any, len(CaptureColumns))
			return each(func(c *capture.Capture) error {
				fillCaptureRow(row, c)
				return emit(row)
			})
		},
	}
}

func fillCaptureRow(row []any, c *capture.Capture) {
	row[0] = c.ID
	row[1] = c.StudyID
	row[2] = nilIfZero(c.Occasion)
	row[3] = yesNo(c.OccasionSetByHand)
	row[4] = c.StationID
	row[5] = c.TagID
	row[6] = c.OldTagID
	row[7] = string(c.Event)
	row[8] = c.Species
	row[9] = string(c.Sex)
	row[10] = string(c.Age)
	row[11] = c.MassG
	row[12] = string(c.Fate)
	row[13] = c.Observer
	row[14] = c.Device
	row[15] = c.CapturedAt
	row[16] = c.Lat
	row[17] = c.Lon
	row[18] = c.AccuracyM
	row[19] = FormatMeasurements(c.Measurements)
	row[20] = c.Notes
	row[21] = yesNo(c.Revision.Deleted)
	row[22] = c.Revision.ID
}

func nilIfZero(n int) any {
	if n == 0 {
		return nil
	}
	return n
}

func yesNo(b bool) string {
	if b {
		return "yes"
	}
	return "no"
}

// FormatMeasurements writes measurements as "name=value unit; ..." so
// they fit one cell and read back with ParseMeasurements.
func FormatMeasurements(ms []capture.Measurement) string {
	parts := make([]string, len(ms))
	for i, m := range ms {
		parts[i] = m.Name + "=" + strconv.FormatFloat(m.Value, 'g', -1, 64)
		if m.Unit != "" {
			parts[i] += " " + m.Unit
		}
	}
	return strings.Join(parts, "; ")
}
