package wfdb

import (
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"

	"tracelift/record"
)

// ErrSignal is wrapped by errors in signal files.
var ErrSignal = errors.New("wfdb: bad signal file")

// MaxSamples bounds the samples per signal we read (about 28 h at 1 kHz).
const MaxSamples = 100_000_000

// ReadHeaderFile parses the header at path.
func ReadHeaderFile(path string) (*Header, error) {
	f, err := os.Open(path)
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
		f, err := os.Open(filepath.Join(dir, g.file))
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
	out := make([]float64, len(adu))
	for i, v := range adu {
		out[i] = (v - float64(s.Baseline)) / s.Gain * scale
	}
	return out
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
	raw, err := io.ReadAll(io.LimitReader(r, int64(MaxSamples)*int64(len(specs))*2+3))
	if err != nil {
		return nil, fmt.Errorf("%w: %v", ErrSignal, err)
	}
	n := len(specs)
	var vals []float64 // interleaved
	switch fm {
	case 16:
		cnt := len(raw) / 2
		vals = make([]float64, cnt)
		for i := 0; i < cnt; i++ {
			v := int16(uint16(raw[2*i]) | uint16(raw[2*i+1])<<8)
			if v == math.MinInt16 {
				vals[i] = math.NaN()
			} else {
				vals[i] = float64(v)
			}
		}
	case 212:
		cnt := len(raw) / 3 * 2
		if len(raw)%3 == 2 {
			cnt++
		}
		vals = make([]float64, cnt)
		for i := 0; i < cnt; i++ {
			b := raw[3*(i/2):]
			var v int
			if i%2 == 0 {
				v = int(b[0]) | int(b[1]&0x0f)<<8
			} else {
				v = int(b[2]) | int(b[1]&0xf0)<<4
			}
			if v > 2047 {
				v -= 4096
			}
			if v == -2048 {
				vals[i] = math.NaN()
			} else {
				vals[i] = float64(v)
			}
		}
	case 80:
		vals = make([]float64, len(raw))
		for i, b := range raw {
			v := int(b) - 128
			if v == -128 {
				vals[i] = math.NaN()
			} else {
				vals[i] = float64(v)
			}
		}
	default:
		return nil, fmt.Errorf("%w: format %d", ErrSignal, fm)
	}
	frames := len(vals) / n
	if nsamp > 0 {
		if frames < nsamp {
			return nil, fmt.Errorf("%w: header says %d samples, file holds %d", ErrSignal, nsamp, frames)
		}
		frames = nsamp
	}
	out := make([][]float64, n)
	for k := range out {
		out[k] = make([]float64, frames)
		for i := 0; i < frames; i++ {
			out[k][i] = vals[i*n+k]
		}
	}
	return out, nil
}
