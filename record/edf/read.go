package edf

import (
	"bufio"
	"bytes"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"tracelift/record"
)

// ErrFormat is wrapped by every error about the file's content.
var ErrFormat = errors.New("edf: bad file")

// MaxSignals bounds the signals a header may declare.
const MaxSignals = 1024

// maxRecordSamples bounds one data record (64 MiB), the buffer Read holds.
const maxRecordSamples = 32 << 20

type inSignal struct {
	label      string
	unit       string
	pmin, pmax float64
	dmin, dmax int
	spr        int
}

// Read reads an EDF or EDF+C file. Ordinary signals become leads (a label
// "ECG X" or "EKG X" names lead X, spelling normalised with record.CanonicalLead);
// signals whose physical dimension is not a voltage (mV, uV, V) are left
// out. Samples outside a signal's digital range are gaps (NaN), which is
// how Write stores gaps. Each lead's leading and trailing gaps are trimmed
// (its StartS moves accordingly); the file start is the onset of the first
// data record's time-keeping TAL (0 for plain EDF). The annotations of the
// "EDF Annotations" signal are returned, and also set as the record's
// Annotations: "code: text" and short single words as coded annotations,
// any other text as a note. EDF+D (discontinuous) files are refused.
func Read(r io.Reader) (*record.Record, []record.Annotation, error) {
	br := bufio.NewReaderSize(r, 64<<10)
	fixed := make([]byte, 256)
	if _, err := io.ReadFull(br, fixed); err != nil {
		return nil, nil, fmt.Errorf("%w: header shorter than 256 bytes", ErrFormat)
	}
	fld := func(b []byte, a, n int) string { return strings.TrimSpace(string(b[a : a+n])) }
	bad := func(format string, args ...any) error {
		return fmt.Errorf("%w: %s", ErrFormat, fmt.Sprintf(format, args...))
	}
	if v := fld(fixed, 0, 8); v != "0" {
		return nil, nil, bad("version %q is not an EDF version (\"0\")", v)
	}
	reserved := fld(fixed, 192, 44)
	plus := strings.HasPrefix(reserved, "EDF+")
	if strings.HasPrefix(reserved, "EDF+D") {
		return nil, nil, bad("discontinuous EDF+D files are not supported")
	}
	hdrBytes, err1 := strconv.Atoi(fld(fixed, 184, 8))
	nrec, err2 := strconv.Atoi(fld(fixed, 236, 8))
	dur, err3 := strconv.ParseFloat(fld(fixed, 244, 8), 64)
	ns, err4 := strconv.Atoi(fld(fixed, 252, 4))
	switch {
	case err4 != nil || ns < 1 || ns > MaxSignals:
		return nil, nil, bad("signal count %q", fld(fixed, 252, 4))
	case err1 != nil || hdrBytes != 256*(ns+1):
		return nil, nil, bad("header size %q for %d signals", fld(fixed, 184, 8), ns)
	case err2 != nil || nrec < -1:
		return nil, nil, bad("data record count %q", fld(fixed, 236, 8))
	case err3 != nil || !(dur >= 0) || dur > 1e6:
		return nil, nil, bad("data record duration %q", fld(fixed, 244, 8))
	}
	sh := make([]byte, 256*ns)
	if _, err := io.ReadFull(br, sh); err != nil {
		return nil, nil, bad("signal headers shorter than %d bytes", len(sh))
	}
	col := func(off, n, i int) string { return fld(sh, ns*off+i*n, n) }
	sig := make([]inSignal, ns)
	ann := -1
	perRec := 0
	for i := range sig {
		s := &sig[i]
		s.label = col(0, 16, i)
		s.unit = col(96, 8, i)
		var e [5]error
		s.pmin, e[0] = strconv.ParseFloat(col(104, 8, i), 64)
		s.pmax, e[1] = strconv.ParseFloat(col(112, 8, i), 64)
		s.dmin, e[2] = strconv.Atoi(col(120, 8, i))
		s.dmax, e[3] = strconv.Atoi(col(128, 8, i))
		s.spr, e[4] = strconv.Atoi(col(216, 8, i))
		if plus && s.label == AnnotationsLabel && ann < 0 {
			ann = i
		}
		for _, err := range e {
			if err != nil {
				return nil, nil, bad("signal %d (%s): unreadable range or sample count", i+1, s.label)
			}
		}
		if s.spr < 0 || s.spr > 1<<24 {
			return nil, nil, bad("signal %d (%s): %d samples per data record", i+1, s.label, s.spr)
		}
		if i != ann && (s.dmax <= s.dmin || s.dmin < -32768 || s.dmax > 32767 || s.pmin == s.pmax ||
			math.IsNaN(s.pmin) || math.IsNaN(s.pmax) || math.IsInf(s.pmin, 0) || math.IsInf(s.pmax, 0)) {
			return nil, nil, bad("signal %d (%s): bad digital or physical range", i+1, s.label)
		}
		perRec += s.spr
	}
	if perRec == 0 {
		return nil, nil, bad("data records hold no samples")
	}
	if perRec > maxRecordSamples {
		return nil, nil, bad("data records of %d samples are larger than this reader accepts", perRec)
	}
	recBytes := 2 * perRec
	type lead struct {
		idx   int
		name  string
		scale float64
		mv    []float64
	}
	var leads []*lead
	seen := map[string]bool{}
	total := 0
	for i, s := range sig {
		if i == ann {
			continue
		}
		scale, ok := record.MVPerUnit(s.unit)
		if !ok || s.spr == 0 {
			continue
		}
		if dur == 0 {
			return nil, nil, bad("data record duration 0 with signal %s", s.label)
		}
		name := s.label
		if hasTypePrefix(name) { // EDF+ standard texts: type, space, lead
			name = name[4:]
		}
		name = strings.TrimSpace(name)
		if name == "" {
			name = fmt.Sprintf("sig%d", i+1)
		}
		name = record.CanonicalLead(name)
		if seen[name] {
			return nil, nil, bad("lead %s appears twice", name)
		}
		seen[name] = true
		leads = append(leads, &lead{idx: i, name: name, scale: scale})
	}
	if len(leads) == 0 {
		return nil, nil, bad("no voltage signal")
	}
	offs := make([]int, ns+1)
	for i, s := range sig {
		offs[i+1] = offs[i] + 2*s.spr
	}
	buf := make([]byte, recBytes)
	var anns []record.Annotation
	start := 0.0
	for k := 0; nrec < 0 || k < nrec; k++ {
		n, err := io.ReadFull(br, buf)
		if err == io.EOF && nrec < 0 {
			break
		}
		if err != nil {
			return nil, nil, bad("data record %d is short (%d of %d bytes)", k+1, n, recBytes)
		}
		for _, l := range leads {
			s := sig[l.idx]
			total += s.spr
			if total > MaxSamples {
				return nil, nil, bad("more than %d samples", MaxSamples)
			}
			g := (s.pmax - s.pmin) / float64(s.dmax-s.dmin)
			b := buf[offs[l.idx]:offs[l.idx+1]]
			for j := 0; j < s.spr; j++ {
				d := int(int16(uint16(b[2*j]) | uint16(b[2*j+1])<<8))
				v := math.NaN()
				if d >= s.dmin && d <= s.dmax {
					v = (s.pmin + float64(d-s.dmin)*g) * l.scale
				}
				l.mv = append(l.mv, v)
			}
		}
		if ann >= 0 {
			onset, list, err := parseTALs(buf[offs[ann]:offs[ann+1]])
			if err != nil {
				return nil, nil, bad("data record %d: %v", k+1, err)
			}
			if k == 0 {
				start = onset
			} else if math.Abs(onset-(start+float64(k)*dur)) > 1e-6*math.Max(1, math.Abs(onset)) {
				return nil, nil, bad("data record %d starts at %g s, not %g s (a discontinuous file marked EDF+C)", k+1, onset, start+float64(k)*dur)
			}
			anns = append(anns, list...)
		}
	}
	rec := &record.Record{Provenance: record.Provenance{ScaleSource: "file"}}
	for _, l := range leads {
		rate := float64(sig[l.idx].spr) / dur
		if sig, ok := record.Trimmed(l.name, rate, start, l.mv); ok {
			rec.Signals = append(rec.Signals, sig)
		}
	}
	if len(rec.Signals) == 0 {
		return nil, nil, bad("no lead holds a value")
	}
	rec.Annotations = anns
	if err := rec.Validate(); err != nil {
		return nil, nil, fmt.Errorf("edf: %w", err)
	}
	return rec, anns, nil
}

// parseTALs reads the TALs of one data record: the onset of its first
// (time-keeping) TAL and the annotations of all.
func parseTALs(b []byte) (float64, []record.Annotation, error) {
	var out []record.Annotation
	first := math.NaN()
	for len(b) > 0 {
		if b[0] == 0 {
			b = b[1:] // padding after the last TAL
			continue
		}
		end := bytes.IndexByte(b, 0)
		if end < 0 {
			return 0, nil, errors.New("TAL without its closing NUL")
		}
		tal := b[:end]
		b = b[end+1:]
		parts := bytes.Split(tal, []byte{0x14})
		if len(parts) < 2 {
			return 0, nil, fmt.Errorf("TAL %q without an onset", tal)
		}
		on, _, _ := bytes.Cut(parts[0], []byte{0x15}) // duration ignored
		if len(on) < 2 || (on[0] != '+' && on[0] != '-') {
			return 0, nil, fmt.Errorf("TAL onset %q", on)
		}
		t, err := strconv.ParseFloat(string(on), 64)
		if err != nil || math.IsInf(t, 0) {
			return 0, nil, fmt.Errorf("TAL onset %q", on)
		}
		if math.IsNaN(first) {
			first = t
		}
		for _, p := range parts[1:] {
			if len(p) == 0 {
				continue
			}
			out = append(out, fromText(t, string(p)))
		}
	}
	if math.IsNaN(first) {
		return 0, nil, errors.New("no time-keeping TAL")
	}
	return first, out, nil
}

// fromText is the inverse of annotationText.
func fromText(t float64, s string) record.Annotation {
	if looksCoded(s) {
		c, text, _ := strings.Cut(s, ": ")
		return record.Annotation{TS: t, Code: c, Text: text}
	}
	return record.Annotation{TS: t, Code: "note", Text: s}
}
