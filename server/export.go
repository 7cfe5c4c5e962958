package server

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"net/http"
	"os"
	"strconv"
	"strings"
	"time"

	"github.com/labstack/echo/v4"

	"tagtally/capture"
	"tagtally/export"
)

// exportPath is named because, like the backup, a large workbook may take
// longer than an ordinary request: the request timeout skips it.
const exportPath = "/api/v1/studies/:study/export.xlsx"

// exportWorkbook answers the study's workbook. It is written to a
// temporary file first: the captures sheet is read inside a store read
// transaction, which must not wait on a slow network client.
func (s *Server) exportWorkbook(c echo.Context) error {
	e, err := export.LoadStudy(s.store, c.Param("study"), s.cfg.Version, time.Now())
	if err != nil {
		return err
	}
	tmp, err := os.CreateTemp("", "tagtally-export-*.xlsx")
	if err != nil {
		return err
	}
	defer os.Remove(tmp.Name())
	defer tmp.Close()
	if err := e.WriteXLSX(tmp, ""); err != nil {
		return err
	}
	if _, err := tmp.Seek(0, io.SeekStart); err != nil {
		return err
	}
	name := fmt.Sprintf("tagtally-%s-%s.xlsx", safeName(e.Study.ID), time.Now().UTC().Format("20060102"))
	c.Response().Header().Set(echo.HeaderContentDisposition, `attachment; filename="`+name+`"`)
	return c.Stream(http.StatusOK, "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet", tmp)
}

// exportTable answers one table of the workbook as CSV, or the plain
// capture-history file (histories.csv: id, history, covariates) that
// other analysis tools read.
func (s *Server) exportTable(c echo.Context) error {
	table := strings.TrimSuffix(c.Param("table"), ".csv")
	e, err := export.LoadStudy(s.store, c.Param("study"), s.cfg.Version, time.Now())
	if err != nil {
		return err
	}
	var buf bytes.Buffer
	if table == "histories" {
		err = capture.WriteHistoryCSV(&buf, e.Report.Histories)
	} else {
		sh, ok := e.Table(table)
		if !ok {
			return fmt.Errorf("export table %q: %w (tables: histories, %s)", table, capture.ErrNotFound, strings.Join(e.TableNames(), ", "))
		}
		err = export.WriteCSV(&buf, sh)
	}
	if err != nil {
		return err
	}
	c.Response().Header().Set(echo.HeaderContentDisposition, `attachment; filename="`+safeName(e.Study.ID)+"-"+table+`.csv"`)
	return c.Blob(http.StatusOK, "text/csv; charset=utf-8", buf.Bytes())
}

// importAnswer is the reply to an import: the row-level report and
// whether anything was written.
type importAnswer struct {
	Error  string         `json:"error,omitempty"`
	DryRun bool           `json:"dry_run"`
	Report *export.Report `json:"report"`
}

// importFile reads a CSV, XLSX or phone outbox backup for the study. The
// file is the request body, or the "file" part of a multipart form with an
// optional "mapping" part (CSV lines: file column,field). ?dry_run=true
// checks without writing. Any problem writes nothing and answers 422 with
// the report.
func (s *Server) importFile(c echo.Context) error {
	st, err := s.store.GetStudy(c.Param("study"))
	if err != nil {
		return err
	}
	dry, _ := strconv.ParseBool(c.QueryParam("dry_run"))
	data, mapping, name, err := readUpload(c)
	if err != nil {
		return err
	}
	opts := export.Options{Sheet: c.QueryParam("sheet")}
	if len(mapping) > 0 {
		if opts.Mapping, err = export.ReadMapping(mapping); err != nil {
			return echo.NewHTTPError(http.StatusBadRequest, err.Error())
		}
	}
	eng, err := s.engine()
	if err != nil {
		return err
	}
	rep, err := export.Import(st, data, opts, dry, export.SyncWriter(eng, "import:"+safeName(name)))
	if errors.Is(err, export.ErrProblems) {
		return c.JSON(http.StatusUnprocessableEntity, importAnswer{Error: err.Error(), DryRun: dry, Report: rep})
	}
	if err != nil {
		return err
	}
	return c.JSON(http.StatusOK, importAnswer{DryRun: dry, Report: rep})
}

func readUpload(c echo.Context) (data, mapping []byte, name string, err error) {
	name = c.QueryParam("name")
	if strings.HasPrefix(c.Request().Header.Get(echo.HeaderContentType), echo.MIMEMultipartForm) {
		fh, ferr := c.FormFile("file")
		if ferr != nil {
			return nil, nil, "", echo.NewHTTPError(http.StatusBadRequest, "the form has no file part named \"file\"")
		}
		name = fh.Filename
		if data, err = readPart(fh.Open); err != nil {
			return nil, nil, "", err
		}
		if mh, merr := c.FormFile("mapping"); merr == nil {
			if mapping, err = readPart(mh.Open); err != nil {
				return nil, nil, "", err
			}
		}
		return data, mapping, name, nil
	}
	data, err = io.ReadAll(c.Request().Body)
	return data, nil, name, err
}

func readPart[F io.ReadCloser](open func() (F, error)) ([]byte, error) {
	f, err := open()
	if err != nil {
		return nil, err
	}
	defer f.Close()
	return io.ReadAll(f)
}

// safeName keeps letters, digits, dot, dash and underscore, for file names
// in headers and revision sources.
func safeName(s string) string {
	b := []byte(s)
	out := b[:0]
	for _, c := range b {
		if c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || c == '.' || c == '-' || c == '_' {
			out = append(out, c)
		}
	}
	if len(out) == 0 {
		return "file"
	}
	if len(out) > 60 {
		out = out[:60]
	}
	return string(out)
}
