package export

import (
	"fmt"
	"io"
	"math"
	"os"
	"time"

	"github.com/xuri/excelize/v2"
)

// WriteXLSX writes sheets as one workbook to w. tmpDir is where excelize
// may spill large sheets (empty means the system default).
func WriteXLSX(w io.Writer, sheets []Sheet, tmpDir string) (err error) {
	if tmpDir == "" {
		tmpDir = os.TempDir()
	}
	f := excelize.NewFile(excelize.Options{TmpDir: tmpDir})
	defer func() {
		if cerr := f.Close(); err == nil && cerr != nil {
			err = cerr
		}
	}()
	st, err := newStyles(f)
	if err != nil {
		return err
	}
	for i, sh := range sheets {
		if i == 0 {
			if err := f.SetSheetName("Sheet1", sh.Name); err != nil {
				return fmt.Errorf("export: sheet %q: %w", sh.Name, err)
			}
		} else if _, err := f.NewSheet(sh.Name); err != nil {
			return fmt.Errorf("export: sheet %q: %w", sh.Name, err)
		}
		if sh.Stream {
			err = writeStreamed(f, sh, st)
		} else {
			err = writeCells(f, sh, st)
		}
		if err != nil {
			return fmt.Errorf("export: sheet %q: %w", sh.Name, err)
		}
	}
	// The first sheet is the active one by default. (SetActiveSheet would
	// read every worksheet back into memory, streamed ones included.)
	if _, err := f.WriteTo(w); err != nil {
		return fmt.Errorf("export: writing workbook: %w", err)
	}
	return nil
}

type styles struct {
	header, date, number int
}

func newStyles(f *excelize.File) (styles, error) {
	var s styles
	var err error
	if s.header, err = f.NewStyle(&excelize.Style{Font: &excelize.Font{Bold: true}, Fill: excelize.Fill{Type: "pattern", Pattern: 1, Color: []string{"DCE8DF"}}}); err != nil {
		return s, err
	}
	dateFmt := "yyyy-mm-dd hh:mm:ss"
	if s.date, err = f.NewStyle(&excelize.Style{CustomNumFmt: &dateFmt}); err != nil {
		return s, err
	}
	numFmt := "0.####"
	if s.number, err = f.NewStyle(&excelize.Style{CustomNumFmt: &numFmt}); err != nil {
		return s, err
	}
	return s, nil
}

func width(c Column) float64 {
	if c.Width > 0 {
		return c.Width
	}
	w := float64(len(c.Header)) + 3
	if c.Kind == Date && w < 18 {
		w = 18
	}
	if w < 9 {
		w = 9
	}
	return w
}

// cellValue converts a row value to what excelize writes, typed by the
// column's kind.
func cellValue(c Column, v any, st styles) any {
	switch x := v.(type) {
	case nil:
		return nil
	case *float64:
		if x == nil {
			return nil
		}
		return cellValue(c, *x, st)
	case float64:
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return nil
		}
		return x
	case time.Time:
		if x.IsZero() {
			return nil
		}
		return excelize.Cell{StyleID: st.date, Value: x.UTC()}
	case string:
		return Neutralise(x)
	}
	return v
}

func writeStreamed(f *excelize.File, sh Sheet, st styles) error {
	sw, err := f.NewStreamWriter(sh.Name)
	if err != nil {
		return err
	}
	for i, c := range sh.Columns {
		if err := sw.SetColWidth(i+1, i+1, width(c)); err != nil {
			return err
		}
	}
	if err := sw.SetPanes(&excelize.Panes{Freeze: true, YSplit: 1, TopLeftCell: "A2", ActivePane: "bottomLeft"}); err != nil {
		return err
	}
	header := make([]any, len(sh.Columns))
	for i, c := range sh.Columns {
		header[i] = excelize.Cell{StyleID: st.header, Value: c.Header}
	}
	if err := sw.SetRow("A1", header); err != nil {
		return err
	}
	row := 1
	buf := make([]any, len(sh.Columns))
	err = sh.Rows(func(values []any) error {
		if len(values) != len(sh.Columns) {
			return fmt.Errorf("row %d has %d values for %d columns", row, len(values), len(sh.Columns))
		}
		row++
		for i, v := range values {
			buf[i] = cellValue(sh.Columns[i], v, st)
		}
		cell, _ := excelize.CoordinatesToCellName(1, row)
		return sw.SetRow(cell, buf)
	})
	if err != nil {
		return err
	}
	if row > 1 {
		last, _ := excelize.CoordinatesToCellName(len(sh.Columns), row)
		// A table gives the header its filter buttons.
		if err := sw.AddTable(&excelize.Table{Range: "A1:" + last, Name: tableName(sh.Name), StyleName: "TableStyleLight1"}); err != nil {
			return err
		}
	}
	return sw.Flush()
}

func writeCells(f *excelize.File, sh Sheet, st styles) error {
	for i, c := range sh.Columns {
		col, _ := excelize.ColumnNumberToName(i + 1)
		if err := f.SetColWidth(sh.Name, col, col, width(c)); err != nil {
			return err
		}
	}
	header := make([]any, len(sh.Columns))
	for i, c := range sh.Columns {
		header[i] = c.Header
	}
	if err := f.SetSheetRow(sh.Name, "A1", &header); err != nil {
		return err
	}
	lastCol, _ := excelize.ColumnNumberToName(max(1, len(sh.Columns)))
	if err := f.SetCellStyle(sh.Name, "A1", lastCol+"1", st.header); err != nil {
		return err
	}
	row := 1
	err := sh.Rows(func(values []any) error {
		if len(values) != len(sh.Columns) {
			return fmt.Errorf("row %d has %d values for %d columns", row, len(values), len(sh.Columns))
		}
		row++
		for i, v := range values {
			cell, _ := excelize.CoordinatesToCellName(i+1, row)
			switch x := cellValue(sh.Columns[i], v, st).(type) {
			case nil:
			case excelize.Cell:
				if err := f.SetCellValue(sh.Name, cell, x.Value); err != nil {
					return err
				}
				if err := f.SetCellStyle(sh.Name, cell, cell, x.StyleID); err != nil {
					return err
				}
			default:
				if err := f.SetCellValue(sh.Name, cell, x); err != nil {
					return err
				}
			}
		}
		return nil
	})
	if err != nil {
		return err
	}
	if err := f.SetPanes(sh.Name, &excelize.Panes{Freeze: true, YSplit: 1, TopLeftCell: "A2", ActivePane: "bottomLeft"}); err != nil {
		return err
	}
	for i, ch := range sh.Charts {
		if row < 2 {
			break
		}
		if err := addChart(f, sh, ch, row, i); err != nil {
			return err
		}
	}
	return nil
}

func addChart(f *excelize.File, sh Sheet, ch Chart, lastRow, index int) error {
	ref := func(col int) string {
		name, _ := excelize.ColumnNumberToName(col + 1)
		return fmt.Sprintf("'%s'!$%s$2:$%s$%d", sh.Name, name, name, lastRow)
	}
	kind := excelize.Line
	switch ch.Kind {
	case "bar":
		kind = excelize.Col
	case "scatter":
		kind = excelize.Scatter
	}
	c := &excelize.Chart{
		Type:      kind,
		Title:     excelize.ChartTitle{Paragraph: []excelize.RichTextRun{{Text: ch.Title}}},
		Legend:    excelize.ChartLegend{Position: "bottom"},
		YAxis:     excelize.ChartAxis{Title: excelize.ChartTitle{Paragraph: []excelize.RichTextRun{{Text: ch.YTitle}}}},
		XAxis:     excelize.ChartAxis{Title: excelize.ChartTitle{Paragraph: []excelize.RichTextRun{{Text: sh.Columns[ch.Category].Header}}}},
		Dimension: excelize.ChartDimension{Width: 640, Height: 360},
	}
	for _, s := range ch.Series {
		nameCol, _ := excelize.ColumnNumberToName(s + 1)
		c.Series = append(c.Series, excelize.ChartSeries{
			Name:       fmt.Sprintf("'%s'!$%s$1", sh.Name, nameCol),
			Categories: ref(ch.Category),
			Values:     ref(s),
		})
	}
	anchorCol, _ := excelize.ColumnNumberToName(len(sh.Columns) + 2)
	anchor := fmt.Sprintf("%s%d", anchorCol, 2+index*20)
	return f.AddChart(sh.Name, anchor, c)
}

// tableName makes a spreadsheet table name from a sheet name: letters,
// digits and underscores only, starting with a letter.
func tableName(sheet string) string {
	b := []byte("Table_")
	for _, r := range sheet {
		if r < 128 && (r == '_' || r >= '0' && r <= '9' || r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z') {
			b = append(b, byte(r))
		}
	}
	return string(b)
}
