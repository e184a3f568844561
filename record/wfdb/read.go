package wfdb

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"math"
	"path/filepath"
	"strings"

	"tracelift/record"
)

// ErrSignal is wrapped by errors in signal files.
var ErrSignal = errors.New("wfdb: bad signal file")

// MaxSamples bounds the samples per signal we read (about 28 h at 1 kHz).
const MaxSamples = 100_000_000

// MaxTotalSamples bounds the samples of all signals of one signal file
// held at once (8 bytes each decoded: 512 MB), a day of two leads at
// 360 Hz (a Holter record) with room to spare.
const MaxTotalSamples = 64 << 20

// ReadHeaderFile parses the header at path.
func ReadHeaderFile(path string) (*Header, error) {
	f, err := openRegular(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	h, err := ParseHeader(f)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	return h, nil
}

// ReadRecord reads the record whose header is at path (".hea" may be
// omitted). Lead names are normalised with record.CanonicalLead.
func ReadRecord(path string) (*record.Record, error) {
	if !strings.HasSuffix(path, ".hea") {
		path += ".hea"
	}
	h, err := ReadHeaderFile(path)
	if err != nil {
		return nil, err
	}
	dir := filepath.Dir(path)
	rec := &record.Record{Name: h.Name, Provenance: record.Provenance{SourceFile: filepath.Base(path), ScaleSource: "file"}}
	// Group signals by file, keeping order.
	type group struct {
		file string
		idx  []int
	}
	var groups []group
	gi := map[string]int{}
	for i, s := range h.Signals {
		j, ok := gi[s.File]
		if !ok {
			j = len(groups)
			gi[s.File] = j
			groups = append(groups, group{file: s.File})
		}
		groups[j].idx = append(groups[j].idx, i)
	}
	data := make([][]float64, len(h.Signals))
	for _, g := range groups {
		specs := make([]SignalSpec, len(g.idx))
		for k, i := range g.idx {
			specs[k] = h.Signals[i]
		}
		f, err := openRegular(filepath.Join(dir, g.file))
		if err != nil {
			return nil, fmt.Errorf("wfdb: %s: %w", g.file, err)
		}
		cols, err := DecodeSignals(f, specs, h.NSamples)
		f.Close()
		if err != nil {
			return nil, fmt.Errorf("%s: %w", g.file, err)
		}
		for k, i := range g.idx {
			data[i] = cols[k]
		}
	}
	for i, s := range h.Signals {
		name := s.Description
		if name == "" {
			name = fmt.Sprintf("sig%d", i)
		}
		rec.Signals = append(rec.Signals, record.Signal{
			Lead:   record.CanonicalLead(name),
			RateHz: h.FreqHz,
			MV:     toMV(data[i], s),
		})
	}
	return rec, nil
}

func toMV(adu []float64, s SignalSpec) []float64 {
	scale := 1.0
	switch strings.ToLower(s.Units) {
	case "uv", "µv":
		scale = 0.001
	case "v":
		scale = 1000
	}
	// In place: the raw values are not needed after.
	for i, v := range adu {
		adu[i] = (v - float64(s.Baseline)) / s.Gain * scale
	}
	return adu
}

// DecodeSignals reads the interleaved samples of one signal file holding
// the given signals (all the same format, as WFDB requires), returning
// raw ADC values per signal, NaN for invalid samples. nsamp limits the
// number of frames read when positive.
func DecodeSignals(r io.Reader, specs []SignalSpec, nsamp int) ([][]float64, error) {
	if len(specs) == 0 {
		return nil, nil
	}
	fm := specs[0].Format
	for _, s := range specs[1:] {
		if s.Format != fm {
			return nil, fmt.Errorf("%w: mixed formats in one file", ErrSignal)
		}
	}
	if off := specs[0].ByteOffset; off > 0 {
		if _, err := io.CopyN(io.Discard, r, off); err != nil {
			return nil, fmt.Errorf("%w: short file before byte offset", ErrSignal)
		}
	}
	if nsamp > MaxSamples {
		return nil, fmt.Errorf("%w: %d samples is more than this reader accepts", ErrSignal, nsamp)
	}
	n := len(specs)
	maxFrames := min(MaxSamples, MaxTotalSamples/n)
	if nsamp > maxFrames {
		return nil, fmt.Errorf("%w: %d signals of %d samples are more than the %d samples this reader holds at once; cut the record into shorter pieces", ErrSignal, n, nsamp, MaxTotalSamples)
	}
	next, err := sampleReader(bufio.NewReaderSize(r, 64<<10), fm)
	if err != nil {
		return nil, err
	}
	// One decoded copy: each sample goes straight to its signal's slice.
	out := make([][]float64, n)
	if nsamp > 0 {
		for k := range out {
			out[k] = make([]float64, 0, nsamp)
		}
	}
	frames := 0
	frame := make([]float64, n)
	for nsamp <= 0 || frames < nsamp {
		if frames == maxFrames {
			if _, ok, _ := next(); ok {
				return nil, fmt.Errorf("%w: the file holds more than the %d samples this reader holds at once; cut the record into shorter pieces", ErrSignal, MaxTotalSamples)
			}
			break
		}
		k := 0
		for ; k < n; k++ {
			v, ok, err := next()
			if err != nil {
				return nil, fmt.Errorf("%w: %v", ErrSignal, err)
			}
			if !ok {
				break
			}
			frame[k] = v
		}
		if k < n { // the end, or a partial last frame (dropped)
			break
		}
		for k := range out {
			out[k] = append(out[k], frame[k])
		}
		frames++
	}
	if nsamp > 0 && frames < nsamp {
		return nil, fmt.Errorf("%w: header says %d samples, file holds %d", ErrSignal, nsamp, frames)
	}
	return out, nil
}

// sampleReader returns a function giving the next sample of a signal file
// in format fm (16, 212 or 80), NaN for the format's invalid value; ok is
// false at the end of the data.
func sampleReader(r io.ByteReader, fm int) (func() (v float64, ok bool, err error), error) {
	read := func() (byte, bool, error) {
		b, err := r.ReadByte()
		if err == io.EOF {
			return 0, false, nil
		}
		return b, err == nil, err
	}
	switch fm {
	case 16:
		return func() (float64, bool, error) {
			lo, ok, err := read()
			if !ok {
				return 0, false, err
			}
			hi, ok, err := read()
			if !ok {
				return 0, false, err
			}
			v := int16(uint16(lo) | uint16(hi)<<8)
			if v == math.MinInt16 {
				return math.NaN(), true, nil
			}
			return float64(v), true, nil
		}, nil
	case 212:
		// Two 12-bit samples in three bytes: the first in byte 0 and the low
		// nibble of byte 1, the second in byte 2 and the high nibble.
		var b0, b1 byte
		odd := false
		return func() (float64, bool, error) {
			var v int
			if !odd {
				var ok bool
				var err error
				if b0, ok, err = read(); !ok {
					return 0, false, err
				}
				if b1, ok, err = read(); !ok {
					return 0, false, err
				}
				v = int(b0) | int(b1&0x0f)<<8
			} else {
				b2, ok, err := read()
				if !ok {
					return 0, false, err
				}
				v = int(b2) | int(b1&0xf0)<<4
			}
			odd = !odd
			if v > 2047 {
				v -= 4096
			}
			if v == -2048 {
				return math.NaN(), true, nil
			}
			return float64(v), true, nil
		}, nil
	case 80:
		return func() (float64, bool, error) {
			b, ok, err := read()
			if !ok {
				return 0, false, err
			}
			if v := int(b) - 128; v != -128 {
				return float64(v), true, nil
			}
			return math.NaN(), true, nil
		}, nil
	}
	return nil, fmt.Errorf("%w: format %d", ErrSignal, fm)
}
