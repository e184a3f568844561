// Package csvio writes and reads ECG records as CSV text: one row per
// instant, a time column in seconds, one column per lead in mV.
//
// The layout written (the project's CLI contract, see DEVELOPERS.md):
//
//	time_s,I,II,III,aVR,aVL,aVF,V1,V2,V3,V4,V5,V6[,other leads...]
//	0.000,0.0125,...
//
// Time is on the record's clock (seconds, 0 = start of the tracing); rows
// lie on the grid k/rate and start at the grid point at or before the
// earliest sample. Empty cells mark instants where a lead was not recorded
// or is a gap (NaN).
package csvio

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"tracelift/record"
	"tracelift/record/atomic"
)

// DefaultRateHz is the row rate used when Write is given a zero rate (the
// CLI contract's 500 Hz).
const DefaultRateHz = 500

// MaxRows bounds the rows Write produces and Read accepts.
const MaxRows = 50_000_000

// Columns returns the lead columns Write puts after time_s for rec: when
// the record holds at least one of the twelve standard leads, all twelve
// in their standard order (a standard lead the record lacks gets a column
// of empty cells, so every file of a 12-lead tracing has the same header),
// then the record's other leads in record order. A record with no
// standard lead (a rhythm strip "MLII", say) gets only its own leads.
func Columns(rec *record.Record) []string {
	var cols []string
	anyStd := false
	for _, s := range rec.Signals {
		if record.IsStandard(s.Lead) {
			anyStd = true
			break
		}
	}
	if anyStd {
		cols = append(cols, record.Standard12...)
	}
	for _, s := range rec.Signals {
		if !record.IsStandard(s.Lead) {
			cols = append(cols, s.Lead)
		}
	}
	return cols
}

// Write writes rec as CSV with rows at rateHz (0 means DefaultRateHz). A
// signal at another rate, or starting between grid points, is resampled
// by linear interpolation between its two neighbouring samples (no
// anti-alias filter: ECG content lies well below half of the usual output
// rates); an instant next to a gap, or outside the signal, is empty.
// Values are written in mV with four decimals (0.1 µV).
func Write(w io.Writer, rec *record.Record, rateHz float64) (err error) {
	if rec == nil {
		return errors.New("csvio: nil record")
	}
	if rateHz == 0 {
		rateHz = DefaultRateHz
	}
	if !(rateHz > 0) || math.IsInf(rateHz, 0) || rateHz > 1e6 {
		return fmt.Errorf("csvio: bad row rate %v Hz", rateHz)
	}
	if err := rec.Validate(); err != nil {
		return fmt.Errorf("csvio: %w", err)
	}
	cols := Columns(rec)
	sig := make([]*record.Signal, len(cols))
	for i, c := range cols {
		for k := range rec.Signals {
			if rec.Signals[k].Lead == c {
				sig[i] = &rec.Signals[k]
			}
		}
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for i := range rec.Signals {
		s := &rec.Signals[i]
		if s.Len() == 0 {
			continue
		}
		lo = math.Min(lo, s.StartS)
		hi = math.Max(hi, s.StartS+float64(s.Len()-1)/s.RateHz)
	}
	k0, rows := 0.0, 0.0
	if !math.IsInf(lo, 1) {
		k0 = math.Floor(lo*rateHz + 1e-6)
		rows = math.Floor(hi*rateHz+1e-6) - k0 + 1
	}
	if rows > MaxRows {
		return fmt.Errorf("csvio: %.0f rows at %v Hz is more than %d", rows, rateHz, MaxRows)
	}
	bw := bufio.NewWriterSize(w, 64<<10)
	buf := []byte("time_s")
	for _, c := range cols {
		buf = append(buf, ',')
		buf = appendField(buf, c)
	}
	buf = append(buf, '\n')
	dec := timeDecimals(rateHz)
	for r := 0; r < int(rows); r++ {
		if _, err := bw.Write(buf); err != nil {
			return fmt.Errorf("csvio: %w", err)
		}
		t := (k0 + float64(r)) / rateHz
		buf = strconv.AppendFloat(buf[:0], t, 'f', dec, 64)
		for _, s := range sig {
			buf = append(buf, ',')
			if s == nil {
				continue
			}
			if v := valueAt(s, t); !math.IsNaN(v) {
				if math.Abs(v) < 0.00005 {
					v = 0 // no "-0.0000"
				}
				buf = strconv.AppendFloat(buf, v, 'f', 4, 64)
			}
		}
		buf = append(buf, '\n')
	}
	if _, err := bw.Write(buf); err != nil {
		return fmt.Errorf("csvio: %w", err)
	}
	if err := bw.Flush(); err != nil {
		return fmt.Errorf("csvio: %w", err)
	}
	return nil
}

// timeDecimals returns the fewest decimals (3 to 9) that write k/rate
// exactly for every k, or 9 when the period has no short decimal form.
func timeDecimals(rateHz float64) int {
	p := 1 / rateHz
	for d := 3; d < 9; d++ {
		m := p * math.Pow10(d)
		if math.Abs(m-math.Round(m)) < 1e-6 {
			return d
		}
	}
	return 9
}

// valueAt returns the signal's value at time t by linear interpolation,
// NaN outside the signal or next to a gap.
func valueAt(s *record.Signal, t float64) float64 {
	x := (t - s.StartS) * s.RateHz
	j := math.Floor(x + 1e-6)
	f := x - j
	if f < 1e-6 {
		f = 0
	}
	if j < 0 || j >= float64(len(s.MV)) {
		return math.NaN()
	}
	i := int(j)
	if f == 0 {
		return s.MV[i]
	}
	if i+1 >= len(s.MV) {
		return math.NaN()
	}
	return s.MV[i]*(1-f) + s.MV[i+1]*f // NaN propagates
}

// appendField quotes a lead name when it holds a separator Read might
// pick (comma, semicolon, tab), a quote or a line break (RFC 4180 quoting).
func appendField(b []byte, s string) []byte {
	if !strings.ContainsAny(s, ",;\t\"\r\n") {
		return append(b, s...)
	}
	b = append(b, '"')
	for i := 0; i < len(s); i++ {
		if s[i] == '"' {
			b = append(b, '"')
		}
		b = append(b, s[i])
	}
	return append(b, '"')
}

// WriteFile writes rec as CSV at path through atomic.WriteFile, so a
// reader or a crash never sees half a file.
func WriteFile(path string, rec *record.Record, rateHz float64) error {
	return atomic.WriteFile(path, func(w io.Writer) error { return Write(w, rec, rateHz) }, 0o644)
}
