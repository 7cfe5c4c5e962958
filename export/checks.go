package export

import (
	"strings"

	"tagtally/capture"
)

// ChecksSheet lists every open data-check finding with the records it
// names, so the program office sees what the estimates rest on.
func ChecksSheet(checks []capture.Check) Sheet {
	rows := make([][]any, len(checks))
	for i, c := range checks {
		var occ any
		if c.Occasion > 0 {
			occ = c.Occasion
		}
		rows[i] = []any{c.Code, c.Severity, c.Title, c.Explanation, c.Advice, yesNo(c.AffectsEstimates), c.Effect,
			strings.Join(c.Tags, ", "), occ, strings.Join(c.Devices, ", "), strings.Join(c.CaptureIDs, ", ")}
	}
	return Sheet{
		Name:   "Data checks",
		Stream: true, // one row per finding: can be long on messy data
		Columns: []Column{
			{Header: "check", Width: 18}, {Header: "severity"}, {Header: "title", Width: 36}, {Header: "explanation", Width: 60},
			{Header: "advice", Width: 50}, {Header: "affects estimates"}, {Header: "effect", Width: 40},
			{Header: "tags", Width: 20}, {Header: "occasion", Kind: Integer}, {Header: "devices", Width: 18}, {Header: "record IDs", Width: 40},
		},
		Rows: RowsOf(rows),
	}
}
