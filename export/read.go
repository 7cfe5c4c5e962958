package export

import (
	"bytes"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"strings"
	"unicode/utf8"

	"github.com/xuri/excelize/v2"
)

// ErrNotATable means the file is neither CSV text nor an XLSX workbook.
var ErrNotATable = errors.New("not a CSV or XLSX file")

// ErrEmpty means the file has no header row or no data rows.
var ErrEmpty = errors.New("the file has no rows")

// Table is a file's header and rows as text, with the spreadsheet row
// number of each data row (the header is row 1) so problems can be
// reported where the person will look for them.
type Table struct {
	Header []string
	Rows   [][]string
	Line   []int
	// FromWorkbook is true for XLSX input, whose cells are read raw: dates
	// arrive as spreadsheet serial day numbers and numbers in full
	// precision.
	FromWorkbook bool
}

// xlsxMagic starts every XLSX file (it is a ZIP archive).
var xlsxMagic = []byte("PK\x03\x04")

// ReadTable reads a CSV file or the first matching sheet of an XLSX
// workbook. For workbooks it reads the sheet named sheet if given and
// present, otherwise "Captures" if present, otherwise the first sheet.
func ReadTable(data []byte, sheet string) (*Table, error) {
	if bytes.HasPrefix(data, xlsxMagic) {
		return readXLSX(data, sheet)
	}
	if len(bytes.TrimSpace(data)) == 0 {
		return nil, ErrEmpty
	}
	if !utf8.Valid(data) || bytes.IndexByte(data, 0) >= 0 {
		return nil, fmt.Errorf("%w: it is not UTF-8 text (save it as CSV UTF-8 or XLSX)", ErrNotATable)
	}
	data = bytes.TrimPrefix(data, []byte("\xef\xbb\xbf")) // byte-order mark some spreadsheets write
	r := csv.NewReader(bytes.NewReader(data))
	r.FieldsPerRecord = -1
	r.ReuseRecord = false
	t := &Table{}
	for {
		rec, err := r.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, fmt.Errorf("%w: %v", ErrNotATable, err)
		}
		line, _ := r.FieldPos(0)
		if t.Header == nil {
			t.Header = rec
			continue
		}
		if blank(rec) {
			continue
		}
		t.Rows = append(t.Rows, rec)
		t.Line = append(t.Line, line)
	}
	if t.Header == nil || len(t.Rows) == 0 {
		return nil, ErrEmpty
	}
	return t, nil
}

func blank(rec []string) bool {
	for _, f := range rec {
		if strings.TrimSpace(f) != "" {
			return false
		}
	}
	return true
}

func readXLSX(data []byte, sheet string) (*Table, error) {
	f, err := excelize.OpenReader(bytes.NewReader(data))
	if err != nil {
		return nil, fmt.Errorf("%w: %v", ErrNotATable, err)
	}
	defer f.Close()
	names := f.GetSheetList()
	if len(names) == 0 {
		return nil, ErrEmpty
	}
	pick := names[0]
	for _, want := range []string{sheet, "Captures"} {
		for _, n := range names {
			if want != "" && strings.EqualFold(n, want) {
				pick = n
				goto found
			}
		}
	}
found:
	rows, err := f.Rows(pick)
	if err != nil {
		return nil, fmt.Errorf("%w: %v", ErrNotATable, err)
	}
	defer rows.Close()
	t := &Table{FromWorkbook: true}
	n := 0
	for rows.Next() {
		n++
		// Raw values: numbers in full precision, dates as serial day
		// numbers (the field parser converts them), not as displayed.
		rec, err := rows.Columns(excelize.Options{RawCellValue: true})
		if err != nil {
			return nil, fmt.Errorf("%w: row %d: %v", ErrNotATable, n, err)
		}
		if t.Header == nil {
			t.Header = rec
			continue
		}
		if blank(rec) {
			continue
		}
		t.Rows = append(t.Rows, rec)
		t.Line = append(t.Line, n)
	}
	if t.Header == nil || len(t.Rows) == 0 {
		return nil, ErrEmpty
	}
	return t, nil
}
