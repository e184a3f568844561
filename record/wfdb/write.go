package wfdb

import (
	"bufio"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"path/filepath"
	"strconv"
	"strings"

	"tracelift/record"
	"tracelift/record/atomic"
)

// gains lists the gains (adu/mV) WriteRecord chooses from, finest first:
// 1000 adu/mV is 1 µV per step, finer than any paper tracing holds.
var gains = []float64{1000, 500, 200, 100, 50, 20, 10, 5, 2, 1, 0.5, 0.2, 0.1, 0.05, 0.02, 0.01}

// ChooseGain returns the finest gain of the list above under which every
// value fits the 16-bit range −32767..32767 (−32768 marks a gap). The
// test is made on the rounded maximum, which makes the choice stable: the
// values read back from a file written at gain g choose g again.
func ChooseGain(mv []float64) (float64, error) {
	var m float64
	for _, v := range mv {
		if a := math.Abs(v); a > m { // NaN never compares greater
			m = a
		}
	}
	for _, g := range gains {
		if math.Round(m*g) <= math.MaxInt16 {
			return g, nil
		}
	}
	return 0, fmt.Errorf("wfdb: values up to %g mV do not fit format 16", m)
}

// WriteRecord writes rec as the WFDB record dir/name: name.hea, name.dat
// (format 16, little-endian 16-bit, all signals interleaved) and, when the
// record carries annotations, name.atr. Every file goes through
// atomic.WriteFile, the header last, so a reader never finds a header
// naming a partial signal file.
//
// WFDB records have one frame clock: signals at other rates than the
// fastest are resampled to it (linear interpolation, record.Resample);
// frame 0 is at the earliest StartS, later starts are padded with gaps. A
// nonzero earliest StartS is noted in a header comment ("start_s ..."),
// which readers may ignore. Each lead gets gain ChooseGain, baseline 0,
// units mV, its name as the description; NaN becomes −32768, the format's
// invalid value. The header carries each signal's first value and the
// 16-bit sum of its samples, as the WFDB header format specifies.
func WriteRecord(dir, name string, rec *record.Record) error {
	if err := checkName(name); err != nil {
		return err
	}
	if rec == nil {
		return errors.New("wfdb: nil record")
	}
	if err := rec.Validate(); err != nil {
		return fmt.Errorf("wfdb: %w", err)
	}
	h, frames, err := layout(name, rec)
	if err != nil {
		return err
	}
	dat := filepath.Join(dir, name+".dat")
	if err := atomic.WriteFile(dat, func(w io.Writer) error { return writeFrames(w, frames) }, 0o644); err != nil {
		return err
	}
	if len(rec.Annotations) > 0 {
		anns := FromRecord(rec.Annotations, h.FreqHz, startOf(rec))
		if err := WriteAnnotations(filepath.Join(dir, name+".atr"), anns); err != nil {
			return err
		}
	}
	return atomic.WriteFile(filepath.Join(dir, name+".hea"), func(w io.Writer) error { return FormatHeader(w, h) }, 0o644)
}

// checkName accepts record names of letters, digits, '_', '-' and '.'
// (WFDB record names are used to build file names).
func checkName(name string) error {
	if name == "" || name == "." || name == ".." {
		return fmt.Errorf("wfdb: bad record name %q", name)
	}
	for _, c := range name {
		ok := c == '_' || c == '-' || c == '.' || (c >= '0' && c <= '9') || (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z')
		if !ok {
			return fmt.Errorf("wfdb: record name %q: use letters, digits, '_', '-' or '.'", name)
		}
	}
	return nil
}

func startOf(rec *record.Record) float64 {
	t0 := math.Inf(1)
	for i := range rec.Signals {
		t0 = math.Min(t0, rec.Signals[i].StartS)
	}
	return t0
}

// layout builds the header and the quantized frames (per signal) of rec.
func layout(name string, rec *record.Record) (*Header, [][]int16, error) {
	rate := 0.0
	for i := range rec.Signals {
		rate = math.Max(rate, rec.Signals[i].RateHz)
	}
	t0 := startOf(rec)
	h := &Header{Name: name, NSig: len(rec.Signals), FreqHz: rate}
	if t0 != 0 {
		h.Comments = append(h.Comments, "start_s "+strconv.FormatFloat(t0, 'g', -1, 64))
	}
	cols := make([][]float64, len(rec.Signals))
	n := 0
	for i := range rec.Signals {
		s := rec.Signals[i]
		if s.RateHz != rate {
			s = s.Resample(rate)
		}
		off := int(math.Round((s.StartS - t0) * rate))
		if off+s.Len() > MaxSamples {
			return nil, nil, fmt.Errorf("wfdb: lead %s: %d samples is more than %d", s.Lead, off+s.Len(), MaxSamples)
		}
		c := make([]float64, off+s.Len())
		for k := 0; k < off; k++ {
			c[k] = math.NaN()
		}
		copy(c[off:], s.MV)
		cols[i] = c
		n = max(n, len(c))
	}
	if n*len(cols) > 2*MaxSamples {
		return nil, nil, fmt.Errorf("wfdb: %d frames of %d signals is too large", n, len(cols))
	}
	h.NSamples = n
	frames := make([][]int16, len(cols))
	for i, c := range cols {
		g, err := ChooseGain(c)
		if err != nil {
			return nil, nil, fmt.Errorf("%w (lead %s)", err, rec.Signals[i].Lead)
		}
		q := make([]int16, n)
		var sum int16
		for k := range q {
			v := int16(math.MinInt16)
			if k < len(c) && !math.IsNaN(c[k]) {
				v = int16(math.Round(c[k] * g))
			}
			q[k] = v
			sum += v // wraps, as the 16-bit checksum does
		}
		frames[i] = q
		spec := SignalSpec{
			File: name + ".dat", Format: 16, Gain: g, Baseline: 0, Units: "mV",
			ADCRes: 16, ADCZero: 0, Checksum: int(sum), HasChecksum: true,
			Description: description(rec.Signals[i].Lead),
		}
		if n > 0 {
			spec.InitVal = int(q[0])
		}
		h.Signals = append(h.Signals, spec)
	}
	return h, frames, nil
}

// description makes a lead name fit a header line: control characters
// become spaces and runs of spaces one space.
func description(lead string) string {
	b := []rune(lead)
	for i, c := range b {
		if c < 0x20 || c == 0x7f {
			b[i] = ' '
		}
	}
	return strings.Join(strings.Fields(string(b)), " ")
}

func writeFrames(w io.Writer, frames [][]int16) error {
	bw := bufio.NewWriterSize(w, 64<<10)
	if len(frames) > 0 {
		var b [2]byte
		for k := range frames[0] {
			for _, f := range frames {
				binary.LittleEndian.PutUint16(b[:], uint16(f[k]))
				bw.Write(b[:])
			}
		}
	}
	return bw.Flush()
}

// FormatHeader writes a single-segment header in the WFDB header format
// (record line, one line per signal, then comments).
func FormatHeader(w io.Writer, h *Header) error {
	bw := bufio.NewWriter(w)
	fmt.Fprintf(bw, "%s %d %s %d\n", h.Name, len(h.Signals), strconv.FormatFloat(h.FreqHz, 'f', -1, 64), h.NSamples)
	for _, s := range h.Signals {
		fmt.Fprintf(bw, "%s %d %s(%d)/%s %d %d %d %d %d", s.File, s.Format,
			strconv.FormatFloat(s.Gain, 'f', -1, 64), s.Baseline, s.Units,
			s.ADCRes, s.ADCZero, s.InitVal, s.Checksum, s.BlockSize)
		if s.Description != "" {
			fmt.Fprintf(bw, " %s", s.Description)
		}
		bw.WriteByte('\n')
	}
	for _, c := range h.Comments {
		fmt.Fprintf(bw, "# %s\n", c)
	}
	if err := bw.Flush(); err != nil {
		return fmt.Errorf("wfdb: %w", err)
	}
	return nil
}

// CheckName reports whether name can be a record name (letters, digits,
// '_', '-' and '.'), so a caller can refuse one before writing anything.
func CheckName(name string) error { return checkName(name) }
