package capture

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"sort"
	"strconv"
	"strings"
)

// HistoryCSVError reports a problem in a history CSV file at a position:
// Line is the 1-based line of the file, Column the 1-based field (column)
// number, 0 when the CSV syntax itself is broken (the cause then says
// where on the line). Field is the column's header name when known. It
// unwraps to the cause, which wraps ErrInvalid.
type HistoryCSVError struct {
	Line   int
	Column int
	Field  string
	Err    error
}

// Error returns "history CSV line L, column C (FIELD): CAUSE".
func (e *HistoryCSVError) Error() string {
	var b strings.Builder
	fmt.Fprintf(&b, "history CSV line %d", e.Line)
	if e.Column > 0 {
		fmt.Fprintf(&b, ", column %d", e.Column)
	}
	if e.Field != "" {
		fmt.Fprintf(&b, " (%s)", e.Field)
	}
	b.WriteString(": ")
	b.WriteString(e.Err.Error())
	return b.String()
}

// Unwrap returns the cause.
func (e *HistoryCSVError) Unwrap() error { return e.Err }

// Column names with a fixed meaning in a history CSV (matched
// case-insensitively, surrounding spaces ignored). Any other column holds a
// numeric individual covariate named after its (lower-case) header.
const (
	colID      = "id"
	colHistory = "history"
	colSex     = "sex"
	colAge     = "age"
	colMass    = "mass"
	colMassG   = "mass_g"
	colGroup   = "group"
	colSpecies = "species"
	colRemoved = "removed"
)

// ReadHistoryCSV reads capture histories from a CSV file with a header row:
//
//	id,history[,sex,age,mass,group,species,COVARIATE...,removed]
//
// id is the animal's tag (unique, no control characters or surrounding
// spaces); history is a 0/1 string with one character per occasion, the
// same length on every row and at least one 1. Optional columns, in any
// order: sex (female/male/unknown or f/m/u), age
// (juvenile/subadult/adult/unknown or j/s/a/u), mass or mass_g (grams,
// > 0), group and species (text), removed (1/0, true/false, yes/no: lost
// on capture at the last capture). Every other column is a numeric
// covariate; an empty cell leaves it unset for that animal. Empty cells of
// the optional columns mean unknown. Occasions are numbered 1..k.
//
// Errors are *HistoryCSVError with the line and column, wrapping
// ErrInvalid. A file with a header and no rows gives an empty set.
func ReadHistoryCSV(r io.Reader) (*HistorySet, error) {
	cr := csv.NewReader(r)
	cr.ReuseRecord = false
	header, err := cr.Read()
	if err == io.EOF {
		return nil, &HistoryCSVError{Line: 1, Err: fmt.Errorf("%w: the file is empty; it needs a header row starting id,history", ErrInvalid)}
	}
	if err != nil {
		return nil, csvSyntax(err)
	}
	names := make([]string, len(header))
	where := map[string]int{}
	for i, h := range header {
		n := strings.ToLower(strings.TrimSpace(strings.TrimPrefix(h, "\ufeff")))
		if n == "" {
			return nil, &HistoryCSVError{Line: 1, Column: i + 1, Err: fmt.Errorf("%w: empty column name", ErrInvalid)}
		}
		if n == colMassG {
			n = colMass
		}
		if _, dup := where[n]; dup {
			return nil, &HistoryCSVError{Line: 1, Column: i + 1, Field: n, Err: fmt.Errorf("%w: column %q appears twice", ErrInvalid, n)}
		}
		where[n] = i
		names[i] = n
	}
	for _, need := range []string{colID, colHistory} {
		if _, ok := where[need]; !ok {
			return nil, &HistoryCSVError{Line: 1, Err: fmt.Errorf("%w: the header has no %q column (columns: %s)", ErrInvalid, need, strings.Join(names, ", "))}
		}
	}
	cr.FieldsPerRecord = len(header)

	hs := &HistorySet{Animals: []AnimalHistory{}}
	ids := map[string]int{}
	k := -1
	for {
		rec, err := cr.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, csvSyntax(err)
		}
		line, _ := cr.FieldPos(0)
		bad := func(i int, format string, args ...any) error {
			return &HistoryCSVError{Line: line, Column: i + 1, Field: names[i], Err: fmt.Errorf("%w: "+format, append([]any{ErrInvalid}, args...)...)}
		}
		var a AnimalHistory
		for i, v := range rec {
			switch names[i] {
			case colID:
				if err := checkTagText(colID, v); err != nil {
					return nil, bad(i, "animal ID: %s", err.(*ValidationError).Message)
				}
				if first, dup := ids[v]; dup {
					return nil, bad(i, "animal %q already appears on line %d", v, first)
				}
				ids[v] = line
				a.ID, a.Tags = v, []string{v}
			case colHistory:
				if v == "" {
					return nil, bad(i, "the capture history is empty")
				}
				if k >= 0 && len(v) != k {
					return nil, bad(i, "history %q has %d occasions; earlier rows have %d", v, len(v), k)
				}
				a.Caught = make([]bool, len(v))
				for j := 0; j < len(v); j++ {
					switch v[j] {
					case '0':
					case '1':
						a.Caught[j] = true
						a.Captures++
					default:
						return nil, bad(i, "history %q: character %d is %q; use only 0 and 1", v, j+1, v[j])
					}
				}
				if a.Captures == 0 {
					return nil, bad(i, "history %q has no capture (no 1)", v)
				}
				k = len(v)
			case colSex:
				s, ok := parseSex(v)
				if !ok {
					return nil, bad(i, "sex %q: use female, male, unknown (or f, m, u)", v)
				}
				a.Sex = s
			case colAge:
				ag, ok := parseAge(v)
				if !ok {
					return nil, bad(i, "age %q: use juvenile, subadult, adult, unknown (or j, s, a, u)", v)
				}
				a.Age = ag
			case colMass:
				if v == "" {
					continue
				}
				m, err := parseNumber(v)
				if err != nil || m <= 0 {
					return nil, bad(i, "mass %q must be a number of grams above 0", v)
				}
				a.MassG = &m
			case colGroup:
				a.Group = v
			case colSpecies:
				a.Species = v
			case colRemoved:
				b, ok := parseYesNo(v)
				if !ok {
					return nil, bad(i, "removed %q: use 1/0, true/false or yes/no", v)
				}
				a.Removed = b
			default:
				if v == "" {
					continue
				}
				x, err := parseNumber(v)
				if err != nil {
					return nil, bad(i, "covariate %q: %q is not a finite number", names[i], v)
				}
				if a.Covariates == nil {
					a.Covariates = map[string]float64{}
				}
				a.Covariates[names[i]] = x
			}
		}
		hs.Animals = append(hs.Animals, a)
	}
	if k > 0 {
		hs.Occasions = make([]int, k)
		for j := range hs.Occasions {
			hs.Occasions[j] = j + 1
		}
	}
	return hs, nil
}

func csvSyntax(err error) error {
	var pe *csv.ParseError
	if errors.As(err, &pe) {
		return &HistoryCSVError{Line: pe.Line, Err: fmt.Errorf("%w: CSV syntax at byte %d of the line: %v", ErrInvalid, pe.Column, pe.Err)}
	}
	return fmt.Errorf("history CSV: %w", err)
}

func parseNumber(v string) (float64, error) {
	x, err := strconv.ParseFloat(strings.TrimSpace(v), 64)
	if err != nil {
		return 0, err
	}
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return 0, errors.New("not finite")
	}
	return x, nil
}

func parseSex(v string) (Sex, bool) {
	switch strings.ToLower(strings.TrimSpace(v)) {
	case "":
		return "", true
	case "f", "female":
		return SexFemale, true
	case "m", "male":
		return SexMale, true
	case "u", "unknown":
		return SexUnknown, true
	}
	return "", false
}

func parseAge(v string) (AgeClass, bool) {
	switch strings.ToLower(strings.TrimSpace(v)) {
	case "":
		return "", true
	case "j", "juvenile":
		return AgeJuvenile, true
	case "s", "subadult":
		return AgeSubadult, true
	case "a", "adult":
		return AgeAdult, true
	case "u", "unknown":
		return AgeUnknown, true
	}
	return "", false
}

func parseYesNo(v string) (bool, bool) {
	switch strings.ToLower(strings.TrimSpace(v)) {
	case "", "0", "false", "no", "n":
		return false, true
	case "1", "true", "yes", "y":
		return true, true
	}
	return false, false
}

// WriteHistoryCSV writes h in the format ReadHistoryCSV reads: id and
// history, then sex, age, mass, group and species when any animal has
// them, the covariates in name order, and removed (0/1) when any animal was
// removed. Tag chains and first/last times are not written. It refuses
// (ErrInvalid) rows whose length differs from h.Occasions, rows with no
// capture, and duplicate or unsafe IDs, so that what it writes reads back.
func WriteHistoryCSV(w io.Writer, h *HistorySet) error {
	k := len(h.Occasions)
	var hasSex, hasAge, hasMass, hasGroup, hasSpecies, hasRemoved bool
	covs := map[string]bool{}
	ids := map[string]bool{}
	for i := range h.Animals {
		a := &h.Animals[i]
		if err := checkTagText("id", a.ID); err != nil {
			return fmt.Errorf("history CSV: animal %d: %w", i+1, err)
		}
		if ids[a.ID] {
			return fmt.Errorf("history CSV: %w: animal %q appears twice", ErrInvalid, a.ID)
		}
		ids[a.ID] = true
		if len(a.Caught) != k || k == 0 || lastCaught(a.Caught) < 0 {
			return fmt.Errorf("history CSV: %w: animal %q has a history of %d occasions with %d captures; want %d occasions and at least one capture", ErrInvalid, a.ID, len(a.Caught), a.Captures, k)
		}
		hasSex = hasSex || a.Sex != ""
		hasAge = hasAge || a.Age != ""
		hasMass = hasMass || a.MassG != nil
		hasGroup = hasGroup || a.Group != ""
		hasSpecies = hasSpecies || a.Species != ""
		hasRemoved = hasRemoved || a.Removed
		for name, v := range a.Covariates {
			n := strings.ToLower(strings.TrimSpace(name))
			if n != name || n == "" || reservedColumn(n) {
				return fmt.Errorf("history CSV: %w: covariate name %q must be lower case, trimmed, and not a reserved column", ErrInvalid, name)
			}
			if !finite(v) {
				return fmt.Errorf("history CSV: %w: animal %q: covariate %q is not finite", ErrInvalid, a.ID, name)
			}
			covs[name] = true
		}
		if a.MassG != nil && (!finite(*a.MassG) || *a.MassG <= 0) {
			return fmt.Errorf("history CSV: %w: animal %q: mass %v", ErrInvalid, a.ID, *a.MassG)
		}
	}
	covNames := make([]string, 0, len(covs))
	for n := range covs {
		covNames = append(covNames, n)
	}
	sort.Strings(covNames)

	header := []string{colID, colHistory}
	add := func(yes bool, name string) {
		if yes {
			header = append(header, name)
		}
	}
	add(hasSex, colSex)
	add(hasAge, colAge)
	add(hasMass, colMass)
	add(hasGroup, colGroup)
	add(hasSpecies, colSpecies)
	header = append(header, covNames...)
	add(hasRemoved, colRemoved)

	cw := csv.NewWriter(w)
	if err := cw.Write(header); err != nil {
		return fmt.Errorf("history CSV: %w", err)
	}
	rec := make([]string, 0, len(header))
	for i := range h.Animals {
		a := &h.Animals[i]
		rec = append(rec[:0], a.ID, a.String())
		if hasSex {
			rec = append(rec, string(a.Sex))
		}
		if hasAge {
			rec = append(rec, string(a.Age))
		}
		if hasMass {
			rec = append(rec, formatOptional(a.MassG))
		}
		if hasGroup {
			rec = append(rec, a.Group)
		}
		if hasSpecies {
			rec = append(rec, a.Species)
		}
		for _, n := range covNames {
			if v, ok := a.Covariates[n]; ok {
				rec = append(rec, strconv.FormatFloat(v, 'g', -1, 64))
			} else {
				rec = append(rec, "")
			}
		}
		if hasRemoved {
			rec = append(rec, map[bool]string{true: "1", false: "0"}[a.Removed])
		}
		if err := cw.Write(rec); err != nil {
			return fmt.Errorf("history CSV: %w", err)
		}
	}
	cw.Flush()
	if err := cw.Error(); err != nil {
		return fmt.Errorf("history CSV: %w", err)
	}
	return nil
}

func reservedColumn(n string) bool {
	switch n {
	case colID, colHistory, colSex, colAge, colMass, colMassG, colGroup, colSpecies, colRemoved:
		return true
	}
	return false
}

func formatOptional(p *float64) string {
	if p == nil {
		return ""
	}
	return strconv.FormatFloat(*p, 'g', -1, 64)
}
