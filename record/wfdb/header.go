package wfdb

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
)

// ErrHeader is wrapped by every header parsing error.
var ErrHeader = errors.New("wfdb: bad header")

// SignalSpec is one signal line of a header.
type SignalSpec struct {
	File        string
	Format      int
	SkewSamples int
	ByteOffset  int64
	Gain        float64 // adu per physical unit; 0 in the file means 200
	Baseline    int
	Units       string
	ADCRes      int
	ADCZero     int
	InitVal     int
	Checksum    int
	HasChecksum bool
	BlockSize   int
	Description string
}

// Header is a parsed single-segment WFDB header.
type Header struct {
	Name     string
	NSig     int
	FreqHz   float64
	NSamples int // 0 when not stated
	BaseTime string
	BaseDate string
	Signals  []SignalSpec
	Comments []string
}

// maxSignals bounds the signal count a header may declare, so a hostile
// header cannot make us allocate without limit.
const maxSignals = 4096

// ParseHeader reads a header from r.
func ParseHeader(r io.Reader) (*Header, error) {
	sc := bufio.NewScanner(r)
	sc.Buffer(make([]byte, 0, 4096), 1<<20)
	h := &Header{}
	gotRecord := false
	line := 0
	for sc.Scan() {
		line++
		txt := strings.TrimSpace(sc.Text())
		if txt == "" {
			continue
		}
		if strings.HasPrefix(txt, "#") {
			h.Comments = append(h.Comments, strings.TrimSpace(strings.TrimPrefix(txt, "#")))
			continue
		}
		if !gotRecord {
			if err := h.parseRecordLine(txt); err != nil {
				return nil, fmt.Errorf("%w: line %d: %v", ErrHeader, line, err)
			}
			gotRecord = true
			continue
		}
		if len(h.Signals) >= h.NSig {
			// Extra lines after the declared signals: ignore (info strings).
			continue
		}
		s, err := parseSignalLine(txt)
		if err != nil {
			return nil, fmt.Errorf("%w: line %d: %v", ErrHeader, line, err)
		}
		h.Signals = append(h.Signals, s)
	}
	if err := sc.Err(); err != nil {
		return nil, fmt.Errorf("%w: %v", ErrHeader, err)
	}
	if !gotRecord {
		return nil, fmt.Errorf("%w: no record line", ErrHeader)
	}
	if len(h.Signals) != h.NSig {
		return nil, fmt.Errorf("%w: %d signals declared, %d described", ErrHeader, h.NSig, len(h.Signals))
	}
	return h, nil
}

func (h *Header) parseRecordLine(txt string) error {
	f := strings.Fields(txt)
	if len(f) < 2 {
		return errors.New("record line needs a name and a signal count")
	}
	name := f[0]
	if i := strings.IndexByte(name, '/'); i >= 0 {
		return errors.New("multi-segment records are not supported")
	}
	h.Name = name
	n, err := strconv.Atoi(f[1])
	if err != nil || n < 0 || n > maxSignals {
		return fmt.Errorf("bad signal count %q", f[1])
	}
	h.NSig = n
	h.FreqHz = 250 // WFDB default
	if len(f) > 2 {
		fs := f[2]
		if i := strings.IndexAny(fs, "/("); i >= 0 {
			fs = fs[:i]
		}
		v, err := strconv.ParseFloat(fs, 64)
		if err != nil || !(v > 0) || v > 1e7 {
			return fmt.Errorf("bad sampling frequency %q", f[2])
		}
		h.FreqHz = v
	}
	if len(f) > 3 {
		v, err := strconv.Atoi(f[3])
		if err != nil || v < 0 {
			return fmt.Errorf("bad sample count %q", f[3])
		}
		h.NSamples = v
	}
	if len(f) > 4 {
		h.BaseTime = f[4]
	}
	if len(f) > 5 {
		h.BaseDate = f[5]
	}
	return nil
}

func parseSignalLine(txt string) (SignalSpec, error) {
	f := strings.Fields(txt)
	var s SignalSpec
	if len(f) < 2 {
		return s, errors.New("signal line needs a file and a format")
	}
	s.File = f[0]
	if strings.ContainsAny(s.File, `/\`) || s.File == ".." || s.File == "." {
		return s, fmt.Errorf("signal file %q must be a plain name beside the header", s.File)
	}
	ft := f[1]
	if i := strings.IndexByte(ft, '+'); i >= 0 {
		v, err := strconv.ParseInt(ft[i+1:], 10, 64)
		if err != nil || v < 0 {
			return s, fmt.Errorf("bad byte offset in %q", ft)
		}
		s.ByteOffset = v
		ft = ft[:i]
	}
	if i := strings.IndexByte(ft, ':'); i >= 0 {
		v, err := strconv.Atoi(ft[i+1:])
		if err != nil || v < 0 || v > 1e6 {
			return s, fmt.Errorf("bad skew in %q", ft)
		}
		s.SkewSamples = v
		ft = ft[:i]
	}
	if i := strings.IndexByte(ft, 'x'); i >= 0 {
		if ft[i+1:] != "1" {
			return s, fmt.Errorf("multi-frequency signals (%q) are not supported", f[1])
		}
		ft = ft[:i]
	}
	v, err := strconv.Atoi(ft)
	if err != nil {
		return s, fmt.Errorf("bad format %q", f[1])
	}
	switch v {
	case 16, 212, 80:
	default:
		return s, fmt.Errorf("signal format %d is not supported (16, 212, 80 are)", v)
	}
	s.Format = v
	s.Gain = 200
	s.Units = "mV"
	haveBaseline := false
	if len(f) > 2 {
		g := f[2]
		if i := strings.IndexByte(g, '/'); i >= 0 {
			s.Units = g[i+1:]
			g = g[:i]
		}
		if i := strings.IndexByte(g, '('); i >= 0 {
			j := strings.IndexByte(g, ')')
			if j < i {
				return s, fmt.Errorf("bad baseline in %q", f[2])
			}
			b, err := strconv.Atoi(g[i+1 : j])
			if err != nil {
				return s, fmt.Errorf("bad baseline in %q", f[2])
			}
			s.Baseline = b
			haveBaseline = true
			g = g[:i]
		}
		gv, err := strconv.ParseFloat(g, 64)
		if err != nil || gv < 0 || math.IsNaN(gv) || math.IsInf(gv, 0) {
			return s, fmt.Errorf("bad gain %q", f[2])
		}
		if gv > 0 {
			s.Gain = gv
		}
	}
	ints := []*int{&s.ADCRes, &s.ADCZero, &s.InitVal, &s.Checksum, &s.BlockSize}
	k := 3
	for idx, p := range ints {
		if k >= len(f) {
			break
		}
		v, err := strconv.Atoi(f[k])
		if err != nil {
			break // the description starts here
		}
		*p = v
		if idx == 3 {
			s.HasChecksum = true
		}
		k++
	}
	if k < len(f) {
		s.Description = strings.Join(f[k:], " ")
	}
	if !haveBaseline {
		s.Baseline = s.ADCZero
	}
	return s, nil
}
