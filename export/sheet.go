package export

import (
	"strings"
	"time"
)

// Kind is how a column's cells are typed.
type Kind int

const (
	Text    Kind = iota // written as text, neutralised against formulas
	Number              // float64 (nil or NaN leaves the cell empty)
	Integer             // int
	Date                // time.Time, written as a date-time cell in UTC
)

// Column describes one column.
type Column struct {
	Header string
	Kind   Kind
	Width  float64 // in characters; 0 picks one from the header
}

// Rows produces a sheet's rows in order, calling emit once per row. Each
// row has one value per column: string, float64, *float64, int, bool,
// time.Time or nil for an empty cell. An error from emit must be returned.
type Rows func(emit func(row []any) error) error

// Sheet is one table of a workbook or one CSV file.
type Sheet struct {
	Name    string
	Columns []Column
	Rows    Rows
	// Charts are drawn beside the table in the workbook; CSV ignores them.
	Charts []Chart
	// Stream writes the sheet with the stream writer. Use it for sheets
	// that can grow with the study (captures, individuals); small sheets
	// with charts are written cell by cell.
	Stream bool
}

// Chart is a native spreadsheet chart over columns of the sheet.
type Chart struct {
	Title string
	// Kind is "line", "bar" or "scatter".
	Kind string
	// Category is the column index (0-based) of the x values or labels.
	Category int
	// Series are the column indexes (0-based) plotted.
	Series []int
	// YTitle labels the value axis, with its unit.
	YTitle string
}

// RowsOf turns a fixed slice of rows into a Rows function.
func RowsOf(rows [][]any) Rows {
	return func(emit func([]any) error) error {
		for _, r := range rows {
			if err := emit(r); err != nil {
				return err
			}
		}
		return nil
	}
}

// Neutralise makes text safe to open in a spreadsheet: a cell starting
// with = + - @ (or tab / carriage return) would be read as a formula, so
// it gets a leading apostrophe (common practice against formula
// injection). Everything else is returned unchanged.
func Neutralise(s string) string {
	if s == "" {
		return s
	}
	switch s[0] {
	case '=', '+', '-', '@', '\t', '\r':
		return "'" + s
	}
	return s
}

// Unneutralise reverses Neutralise when reading a file this package wrote.
func Unneutralise(s string) string {
	if len(s) >= 2 && s[0] == '\'' && strings.ContainsRune("=+-@\t\r", rune(s[1])) {
		return s[1:]
	}
	return s
}

// TimeFormat is how times are written in CSV and read back: RFC 3339 in UTC.
const TimeFormat = time.RFC3339
