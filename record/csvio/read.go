package csvio

import (
	"bufio"
	"bytes"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"tracelift/record"
)

// Limits that keep Read's memory bounded on hostile input.
const (
	MaxLineBytes = 1 << 20    // one CSV line
	MaxColumns   = 1024       // columns of the header
	MaxCells     = 40_000_000 // rows × leads held in memory (320 MB of float64)
)

// ParseError is a fault at a place in the file. Line counts from 1; Column
// counts from 1 and is 0 when the whole line is at fault.
type ParseError struct {
	Line, Column int
	Err          error
}

func (e *ParseError) Error() string {
	if e.Column > 0 {
		return fmt.Sprintf("csvio: line %d, column %d: %v", e.Line, e.Column, e.Err)
	}
	if e.Line > 0 {
		return fmt.Sprintf("csvio: line %d: %v", e.Line, e.Err)
	}
	return "csvio: " + e.Err.Error()
}

func (e *ParseError) Unwrap() error { return e.Err }

// ErrLineTooLong is wrapped when a line exceeds MaxLineBytes.
var ErrLineTooLong = errors.New("line longer than the reader accepts")

// Read reads a CSV written by Write, or another simple CSV of that shape:
//
//   - one header line; a time column named like "time_s", "time", "t",
//     "Elapsed time" (seconds) or "time_ms", "ms" (milliseconds); every other
//     column is a lead (names normalised with record.CanonicalLead);
//   - optionally a units line right after the header ("sec", "ms",
//     "hh:mm:ss.mmm", "mV", "uV", "V"), or units in the names ("II (uV)");
//   - times as numbers or as clock readings [h:]m:s.fff, evenly spaced;
//   - comma, semicolon or tab separated (with ";" or tab a decimal comma is
//     accepted); lines starting with "#" are comments;
//   - empty cells, "NaN", "NA" or "-" are gaps.
//
// The sample rate comes from the time column. Each lead's leading and
// trailing gaps are trimmed (its StartS moves accordingly) and a lead with
// no value at all is left out, so what Write pads is dropped again.
func Read(r io.Reader) (*record.Record, error) {
	lr := &lineLimit{r: r}
	br := bufio.NewReaderSize(lr, 64<<10)
	// Skip a UTF-8 byte order mark.
	if b, err := br.Peek(3); err == nil && bytes.Equal(b, []byte{0xEF, 0xBB, 0xBF}) {
		br.Discard(3)
	}
	comma := sniffComma(br)
	cr := csv.NewReader(br)
	cr.Comma = comma
	cr.Comment = '#'
	cr.FieldsPerRecord = -1
	cr.LazyQuotes = true
	cr.TrimLeadingSpace = true
	cr.ReuseRecord = true

	fail := func(err error) (*record.Record, error) {
		if errors.Is(err, ErrLineTooLong) {
			return nil, &ParseError{Line: lr.line + 1, Err: ErrLineTooLong}
		}
		var pe *csv.ParseError
		if errors.As(err, &pe) {
			return nil, &ParseError{Line: pe.Line, Column: pe.Column, Err: pe.Err}
		}
		return nil, &ParseError{Err: err}
	}
	head, err := cr.Read()
	if err == io.EOF {
		return nil, &ParseError{Err: errors.New("empty file")}
	}
	if err != nil {
		return fail(err)
	}
	if len(head) > MaxColumns {
		return nil, &ParseError{Line: 1, Err: fmt.Errorf("%d columns, at most %d accepted", len(head), MaxColumns)}
	}
	headLine, _ := cr.FieldPos(0)
	names := make([]string, len(head))
	for i, h := range head {
		names[i] = cleanCell(h)
	}
	tcol, tunit := -1, 1.0
	for i, n := range names {
		if u, ok := timeColumn(n); ok {
			tcol, tunit = i, u
			break
		}
	}
	if tcol < 0 {
		return nil, &ParseError{Line: headLine, Err: errors.New("no time column (name one time_s, time or time_ms)")}
	}
	type column struct {
		name  string
		scale float64 // to mV
		mv    []float64
	}
	var leads []*column
	colOf := make([]int, len(names)) // field -> lead index, -1 for time
	seen := map[string]int{}
	for i, n := range names {
		if i == tcol {
			colOf[i] = -1
			continue
		}
		name, unit := splitUnit(n)
		scale := 1.0
		if unit != "" {
			s, ok := record.MVPerUnit(unit)
			if !ok {
				return nil, &ParseError{Line: headLine, Column: i + 1, Err: fmt.Errorf("lead %q in unknown unit %q (mV, uV or V)", name, unit)}
			}
			scale = s
		}
		if name == "" {
			name = fmt.Sprintf("col%d", i+1)
		}
		name = record.CanonicalLead(name)
		if j, dup := seen[name]; dup {
			return nil, &ParseError{Line: headLine, Column: i + 1, Err: fmt.Errorf("lead %s appears twice (columns %d and %d)", name, j+1, i+1)}
		}
		seen[name] = i
		colOf[i] = len(leads)
		leads = append(leads, &column{name: name, scale: scale})
	}
	if len(leads) == 0 {
		return nil, &ParseError{Line: headLine, Err: errors.New("no lead columns beside the time column")}
	}

	var (
		rows          int
		t0, tPrev     float64
		decimals      int
		unitsLineDone bool
		clock         bool
	)
	for {
		rec, err := cr.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			return fail(err)
		}
		line, _ := cr.FieldPos(0)
		if len(rec) == 1 && strings.TrimSpace(rec[0]) == "" {
			continue // blank line
		}
		if len(rec) > len(names) {
			for _, c := range rec[len(names):] {
				if strings.TrimSpace(c) != "" {
					return nil, &ParseError{Line: line, Err: fmt.Errorf("%d fields, the header has %d", len(rec), len(names))}
				}
			}
			rec = rec[:len(names)]
		}
		tcell := ""
		if tcol < len(rec) {
			tcell = cleanCell(rec[tcol])
		}
		t, dec, isClock, terr := parseTime(tcell, comma)
		if terr != nil && rows == 0 && !unitsLineDone {
			// A units line right after the header?
			if u, ok := unitsLine(rec, tcol); ok {
				unitsLineDone = true
				if u.timeScale != 0 {
					tunit = u.timeScale
				}
				for i, s := range u.scale {
					if i < len(colOf) && colOf[i] >= 0 && s != 0 {
						leads[colOf[i]].scale *= s
					}
				}
				continue
			}
		}
		unitsLineDone = true
		if terr != nil {
			return nil, &ParseError{Line: line, Column: tcol + 1, Err: terr}
		}
		if !isClock {
			t *= tunit
		}
		clock = clock || isClock
		decimals = max(decimals, dec)
		if rows > 0 {
			step := t - tPrev
			if !(step > 0) {
				return nil, &ParseError{Line: line, Column: tcol + 1, Err: fmt.Errorf("time %g s does not increase", t)}
			}
			if rows >= 2 {
				p := (tPrev - t0) / float64(rows-1)
				q := resolution(decimals, tunit, clock)
				if math.Abs(step-p) > 0.01*p+q { // each time rounded by ≤ q/2
					return nil, &ParseError{Line: line, Column: tcol + 1, Err: fmt.Errorf("time step %g s differs from the period %g s (rows must be evenly spaced)", step, p)}
				}
			}
		} else {
			t0 = t
		}
		tPrev = t
		rows++
		if rows > MaxRows || rows*len(leads) > MaxCells {
			return nil, &ParseError{Line: line, Err: fmt.Errorf("more rows than the reader accepts (%d cells)", MaxCells)}
		}
		for i, c := range rec {
			k := colOf[i]
			if k < 0 {
				continue
			}
			v, err := parseValue(c, comma)
			if err != nil {
				return nil, &ParseError{Line: line, Column: i + 1, Err: err}
			}
			leads[k].mv = append(leads[k].mv, v*leads[k].scale)
		}
		for _, l := range leads { // short rows: missing trailing cells are gaps
			if len(l.mv) < rows {
				l.mv = append(l.mv, math.NaN())
			}
		}
	}
	if rows < 2 {
		return nil, &ParseError{Err: fmt.Errorf("%d data rows; at least two are needed to find the sample rate", rows)}
	}
	span := tPrev - t0
	rate := float64(rows-1) / span
	// Each end time is rounded by at most half a unit of its last decimal,
	// so the span is known within one unit q: the snapped rate must stay
	// within that.
	rate = snapRate(rate, resolution(decimals, tunit, clock)/span+1e-9)
	if !(rate > 0) || math.IsInf(rate, 0) {
		return nil, &ParseError{Err: fmt.Errorf("bad sample rate %v Hz from the time column", rate)}
	}
	if rate > MaxRateHz || rate < MinRateHz {
		return nil, &ParseError{Err: fmt.Errorf("the time column steps %g s, a sample rate of %g Hz; ECG records hold %g Hz to %g Hz: check the time column and its unit (time_s in seconds, time_ms in milliseconds)", span/float64(rows-1), rate, float64(MinRateHz), float64(MaxRateHz))}
	}
	out := &record.Record{Provenance: record.Provenance{ScaleSource: "file"}}
	for _, l := range leads {
		if sig, ok := record.Trimmed(l.name, rate, t0, l.mv); ok {
			out.Signals = append(out.Signals, sig)
		}
	}
	if len(out.Signals) == 0 {
		return nil, &ParseError{Err: errors.New("no lead holds a value")}
	}
	if err := out.Validate(); err != nil {
		return nil, fmt.Errorf("csvio: %w", err)
	}
	return out, nil
}

// The sample rates Read accepts: below 1 Hz no ECG wave is resolved, and
// above 100 kHz no electrocardiograph samples (pacemaker-spike channels
// reach about 32 kHz, from memory).
const (
	MinRateHz = 1
	MaxRateHz = 100e3
)

// snapRate returns the value with the fewest decimals within tol·rate of
// rate (tol relative): times written with finite decimals give 499.99998 for 500.
func snapRate(rate, tol float64) float64 {
	for d := 0; d <= 6; d++ {
		p := math.Pow10(d)
		r := math.Round(rate*p) / p
		if math.Abs(r-rate) <= tol*rate {
			return r
		}
	}
	return rate
}

func resolution(decimals int, unit float64, clock bool) float64 {
	q := math.Pow10(-decimals)
	if !clock {
		q *= unit
	}
	return q
}

// lineLimit fails a read once a line exceeds MaxLineBytes and counts lines.
type lineLimit struct {
	r    io.Reader
	cur  int
	line int
}

func (l *lineLimit) Read(p []byte) (int, error) {
	n, err := l.r.Read(p)
	for i := 0; i < n; i++ {
		if p[i] == '\n' {
			l.cur = 0
			l.line++
			continue
		}
		l.cur++
		if l.cur > MaxLineBytes {
			return i, ErrLineTooLong
		}
	}
	return n, err
}

// sniffComma picks the separator from the first line: the most frequent
// of comma, semicolon and tab, comma when none appears.
func sniffComma(br *bufio.Reader) rune {
	b, _ := br.Peek(br.Size())
	var n [3]int // ',' ';' '\t' outside double quotes
	quoted := false
	for _, c := range b {
		if c == '"' {
			quoted = !quoted
		}
		if quoted {
			continue
		}
		if c == '\n' {
			break
		}
		switch c {
		case ',':
			n[0]++
		case ';':
			n[1]++
		case '\t':
			n[2]++
		}
	}
	switch {
	case n[1] > n[0] && n[1] >= n[2]:
		return ';'
	case n[2] > n[0] && n[2] > n[1]:
		return '\t'
	}
	return ','
}

// cleanCell trims spaces and one pair of single quotes ('Elapsed time').
func cleanCell(s string) string {
	s = strings.TrimSpace(s)
	if len(s) >= 2 && s[0] == '\'' && s[len(s)-1] == '\'' {
		s = strings.TrimSpace(s[1 : len(s)-1])
	}
	return s
}

// timeColumn reports whether a header name is a time column and its unit
// in seconds.
func timeColumn(name string) (float64, bool) {
	n := strings.ToLower(strings.NewReplacer(" ", "", "_", "", "-", "", "[", "(", "]", ")").Replace(name))
	switch n {
	case "ms", "tms", "timems", "time(ms)", "msec", "millis", "milliseconds", "elapsedtime(ms)":
		return 0.001, true
	case "t", "s", "ts", "sec", "secs", "seconds", "time", "times", "time(s)", "time(sec)", "timesec",
		"elapsedtime", "elapsedtime(s)":
		return 1, true
	}
	return 0, false
}

// splitUnit splits "II (uV)" or "II [mV]" into name and unit.
func splitUnit(n string) (string, string) {
	for _, br := range [][2]byte{{'(', ')'}, {'[', ']'}} {
		if strings.HasSuffix(n, string(br[1])) {
			if i := strings.LastIndexByte(n, br[0]); i > 0 {
				return strings.TrimSpace(n[:i]), strings.TrimSpace(n[i+1 : len(n)-1])
			}
		}
	}
	return n, ""
}

type units struct {
	timeScale float64   // 0 when unchanged
	scale     []float64 // per field, 0 when unchanged
}

// unitsLine recognises a line of units under the header.
func unitsLine(rec []string, tcol int) (units, bool) {
	u := units{scale: make([]float64, len(rec))}
	any := false
	for i, c := range rec {
		c = strings.ToLower(cleanCell(c))
		c = strings.TrimSuffix(strings.TrimPrefix(c, "("), ")")
		c = strings.TrimSuffix(strings.TrimPrefix(c, "["), "]")
		if c == "" {
			continue
		}
		if i == tcol {
			switch {
			case c == "ms" || c == "msec":
				u.timeScale = 0.001
			case c == "s" || c == "sec" || c == "seconds":
				u.timeScale = 1
			case strings.Contains(c, "hh") || strings.Contains(c, "mm:ss"):
			default:
				return u, false
			}
			any = true
			continue
		}
		s, ok := record.MVPerUnit(c)
		if !ok {
			return u, false
		}
		u.scale[i] = s
		any = true
	}
	return u, any
}

// parseTime reads a number or a clock reading [h:]m:s(.fff), returning
// seconds for a clock reading (the caller applies the unit otherwise),
// the count of decimals, and whether it was a clock reading.
func parseTime(s string, comma rune) (float64, int, bool, error) {
	if s == "" {
		return 0, 0, false, errors.New("empty time")
	}
	if comma != ',' && !strings.Contains(s, ".") {
		s = strings.Replace(s, ",", ".", 1)
	}
	dec := 0
	if i := strings.LastIndexByte(s, '.'); i >= 0 {
		dec = len(s) - i - 1
		for _, c := range s[i+1:] {
			if c < '0' || c > '9' {
				dec = 0
				break
			}
		}
	}
	if strings.Contains(s, ":") {
		parts := strings.Split(s, ":")
		if len(parts) > 3 {
			return 0, 0, false, fmt.Errorf("bad time %q", s)
		}
		var t float64
		for k, p := range parts {
			v, err := strconv.ParseFloat(p, 64)
			if err != nil || v < 0 || (k < len(parts)-1 && v != math.Trunc(v)) {
				return 0, 0, false, fmt.Errorf("bad time %q", s)
			}
			t = t*60 + v
		}
		return t, dec, true, nil
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, 0, false, fmt.Errorf("bad time %q", s)
	}
	return v, dec, false, nil
}

func parseValue(s string, comma rune) (float64, error) {
	s = cleanCell(s)
	switch strings.ToLower(s) {
	case "", "nan", "na", "-", "null":
		return math.NaN(), nil
	}
	if comma != ',' && !strings.Contains(s, ".") {
		s = strings.Replace(s, ",", ".", 1)
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		return 0, fmt.Errorf("bad value %q", s)
	}
	if math.IsInf(v, 0) || math.Abs(v) > 1e9 {
		return 0, fmt.Errorf("value %q out of range", s)
	}
	return v, nil
}
