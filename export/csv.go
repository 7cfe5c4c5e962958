package export

import (
	"encoding/csv"
	"fmt"
	"io"
	"math"
	"strconv"
	"time"
)

// WriteCSV writes one sheet as CSV: a header row, then one line per row.
// Numbers are written in full precision with '.' as the decimal point,
// times in RFC 3339 UTC, empty cells as empty fields, and text is
// neutralised against formulas as in the workbook.
func WriteCSV(w io.Writer, sh Sheet) error {
	cw := csv.NewWriter(w)
	header := make([]string, len(sh.Columns))
	for i, c := range sh.Columns {
		header[i] = c.Header
	}
	if err := cw.Write(header); err != nil {
		return err
	}
	rec := make([]string, len(sh.Columns))
	n := 0
	err := sh.Rows(func(values []any) error {
		n++
		if len(values) != len(sh.Columns) {
			return fmt.Errorf("export: %s row %d has %d values for %d columns", sh.Name, n, len(values), len(sh.Columns))
		}
		for i, v := range values {
			rec[i] = csvField(v)
		}
		return cw.Write(rec)
	})
	if err != nil {
		return err
	}
	cw.Flush()
	return cw.Error()
}

func csvField(v any) string {
	switch x := v.(type) {
	case nil:
		return ""
	case string:
		return Neutralise(x)
	case *float64:
		if x == nil {
			return ""
		}
		return csvField(*x)
	case float64:
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return ""
		}
		return strconv.FormatFloat(x, 'g', -1, 64)
	case int:
		return strconv.Itoa(x)
	case bool:
		if x {
			return "yes"
		}
		return "no"
	case time.Time:
		if x.IsZero() {
			return ""
		}
		return x.UTC().Format(TimeFormat)
	}
	return fmt.Sprint(v)
}
