package wfdb

import (
	"bufio"
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"sort"
	"strings"
	"unicode/utf8"

	"tracelift/record"
	"tracelift/record/atomic"
)

// ErrAnnotation is wrapped by every error reading an annotation file.
var ErrAnnotation = errors.New("wfdb: bad annotation file")

// Annotation is one entry of an MIT annotation file.
type Annotation struct {
	Sample int64  // sample index from the start of the record
	Code   int    // annotation code (1 = normal beat, 5 = PVC, 28 = rhythm change, ...)
	Sub    int    // subtype
	Chan   int    // signal the annotation refers to
	Num    int    // annotator's number field
	Aux    string // auxiliary text (e.g. "(N" for a rhythm change)
}

// Pseudo-codes of the MIT annotation format: the 6-bit code field of a
// 16-bit word carries these instead of an annotation code (WFDB
// Programmer's Guide, "annot(5)" format description).
const (
	codeSkip = 59 // the next 4 bytes hold a 32-bit time step (high 16-bit word first; from memory)
	codeNum  = 60 // the 10-bit field sets num
	codeSub  = 61 // the 10-bit field sets subtyp
	codeChn  = 62 // the 10-bit field sets chan
	codeAux  = 63 // the 10-bit field counts aux bytes that follow (padded to even)
)

// MaxAnnotations bounds what ReadAnnotations accepts from one file.
const MaxAnnotations = 20_000_000

// Codes and mnemonics of the WFDB standard annotation set (ecgcodes.h in
// the WFDB library; from memory, cross-checked against the MIT-BIH record
// 100 summary of 2239 N, 33 A and 1 V beats in TestAnnotations100).
var symbols = [...]string{
	0: "", 1: "N", 2: "L", 3: "R", 4: "a", 5: "V", 6: "F", 7: "J", 8: "A", 9: "S",
	10: "E", 11: "j", 12: "/", 13: "Q", 14: "~", 16: "|", 18: "s", 19: "T",
	20: "*", 21: "D", 22: "\"", 23: "=", 24: "p", 25: "B", 26: "^", 27: "t",
	28: "+", 29: "u", 30: "?", 31: "!", 32: "[", 33: "]", 34: "e", 35: "n",
	36: "@", 37: "x", 38: "f", 39: "(", 40: ")", 41: "r",
}

// Note is the code of a free-text comment annotation (NOTE, shown as ").
const Note = 22

// Symbol returns the mnemonic of an annotation code ("N", "V", "+"), or
// "[code]" for a code without one.
func Symbol(code int) string {
	if code >= 0 && code < len(symbols) && symbols[code] != "" {
		return symbols[code]
	}
	return fmt.Sprintf("[%d]", code)
}

// CodeOf returns the code of a mnemonic and whether it is known.
func CodeOf(sym string) (int, bool) {
	for c, s := range symbols {
		if s != "" && s == sym {
			return c, true
		}
	}
	return 0, false
}

// IsBeat reports whether code marks a QRS complex (the WFDB isqrs set:
// N L R a V F J A S E j / Q B ? e n f r; from memory of the WFDB library's
// annotation code table).
func IsBeat(code int) bool {
	switch code {
	case 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 25, 30, 34, 35, 38, 41:
		return true
	}
	return false
}

// ReadAnnotations reads an MIT-format annotation file.
func ReadAnnotations(path string) ([]Annotation, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("wfdb: %w", err)
	}
	defer f.Close()
	a, err := DecodeAnnotations(f)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	return a, nil
}

// DecodeAnnotations reads MIT-format annotations from r: little-endian
// 16-bit words, each a 6-bit code over a 10-bit field. For an annotation
// code the field is the time step from the previous annotation; SKIP adds
// a 32-bit step (high 16-bit word first), NUM and CHN set the num and chan
// fields of this and later annotations, SUB and AUX set the subtype and
// text of the annotation just read; a zero word ends the file.
func DecodeAnnotations(r io.Reader) ([]Annotation, error) {
	br := bufio.NewReader(r)
	var (
		out        []Annotation
		t          int64
		num, chan_ int
		offset     int64
	)
	word := func() (uint16, error) {
		var b [2]byte
		n, err := io.ReadFull(br, b[:])
		offset += int64(n)
		if err != nil {
			return 0, err
		}
		return binary.LittleEndian.Uint16(b[:]), nil
	}
	bad := func(format string, args ...any) error {
		return fmt.Errorf("%w: byte %d: %s", ErrAnnotation, offset, fmt.Sprintf(format, args...))
	}
	for {
		w, err := word()
		if err == io.EOF {
			return out, nil // files without the final zero word are common
		}
		if err != nil {
			return nil, bad("truncated word")
		}
		code, field := int(w>>10), int(w&0x3ff)
		if code == 0 && field == 0 {
			return out, nil
		}
		switch code {
		case codeSkip:
			hi, err1 := word()
			lo, err2 := word()
			if err1 != nil || err2 != nil {
				return nil, bad("truncated SKIP")
			}
			t += int64(int32(uint32(hi)<<16 | uint32(lo)))
			if t < 0 {
				return nil, bad("SKIP leads to a negative time")
			}
		case codeNum, codeSub, codeChn, codeAux:
			if code == codeNum {
				num = field
			}
			if code == codeChn {
				chan_ = field
			}
			var aux []byte
			if code == codeAux {
				aux = make([]byte, field+field%2)
				n, err := io.ReadFull(br, aux)
				offset += int64(n)
				if err != nil {
					return nil, bad("truncated AUX of %d bytes", field)
				}
				aux = aux[:field]
				if i := bytes.IndexByte(aux, 0); i >= 0 {
					aux = aux[:i]
				}
			}
			if len(out) == 0 {
				continue // a modifier before any annotation modifies nothing
			}
			last := &out[len(out)-1]
			switch code {
			case codeNum:
				last.Num = num
			case codeChn:
				last.Chan = chan_
			case codeSub:
				last.Sub = field
			case codeAux:
				last.Aux = string(aux)
			}
		default:
			t += int64(field)
			if len(out) >= MaxAnnotations {
				return nil, bad("more than %d annotations", MaxAnnotations)
			}
			out = append(out, Annotation{Sample: t, Code: code, Num: num, Chan: chan_})
		}
	}
}

// EncodeAnnotations writes annotations in MIT format, sorted by sample
// (stably), ending with the zero word. Codes must be 1 to 49 (0 would
// read as the end of the file, 50 to 63 are reserved); subtype, chan and
// num must fit the 10-bit field; aux text at most 254 bytes without NUL
// (the WFDB library keeps the length, NUL included, in one byte).
func EncodeAnnotations(w io.Writer, anns []Annotation) error {
	a := append([]Annotation(nil), anns...)
	sort.SliceStable(a, func(i, j int) bool { return a[i].Sample < a[j].Sample })
	bw := bufio.NewWriter(w)
	put := func(v uint16) { binary.Write(bw, binary.LittleEndian, v) }
	var t int64
	num, chn := 0, 0
	for i, x := range a {
		if x.Code < 1 || x.Code > 49 {
			return fmt.Errorf("wfdb: annotation %d: code %d is not 1 to 49", i, x.Code)
		}
		if x.Sample < 0 {
			return fmt.Errorf("wfdb: annotation %d: negative sample %d", i, x.Sample)
		}
		for _, v := range []int{x.Sub, x.Chan, x.Num} {
			if v < 0 || v > 1023 {
				return fmt.Errorf("wfdb: annotation %d: subtype/chan/num %d outside 0..1023", i, v)
			}
		}
		if len(x.Aux) > 254 || strings.IndexByte(x.Aux, 0) >= 0 {
			return fmt.Errorf("wfdb: annotation %d: aux text of %d bytes (at most 254, no NUL)", i, len(x.Aux))
		}
		d := x.Sample - t
		if d > 1023 {
			if d > math.MaxInt32 {
				return fmt.Errorf("wfdb: annotation %d: step of %d samples too long", i, d)
			}
			put(codeSkip << 10)
			put(uint16(uint32(d) >> 16))
			put(uint16(uint32(d)))
			d = 0
		}
		put(uint16(x.Code)<<10 | uint16(d))
		t = x.Sample
		if x.Sub != 0 {
			put(codeSub<<10 | uint16(x.Sub))
		}
		if x.Chan != chn {
			put(codeChn<<10 | uint16(x.Chan))
			chn = x.Chan
		}
		if x.Num != num {
			put(codeNum<<10 | uint16(x.Num))
			num = x.Num
		}
		if x.Aux != "" {
			// The text goes with its terminating NUL counted, then a pad
			// byte to an even length, as in the PhysioNet files ("(N" is
			// written as 3 bytes "(N\x00" and a pad in mitdb 100.atr).
			n := len(x.Aux) + 1
			put(codeAux<<10 | uint16(n))
			bw.WriteString(x.Aux)
			bw.WriteByte(0)
			if n%2 == 1 {
				bw.WriteByte(0)
			}
		}
	}
	put(0)
	if err := bw.Flush(); err != nil {
		return fmt.Errorf("wfdb: %w", err)
	}
	return nil
}

// WriteAnnotations writes an MIT annotation file at path (atomically).
func WriteAnnotations(path string, anns []Annotation) error {
	return atomic.WriteFile(path, func(w io.Writer) error { return EncodeAnnotations(w, anns) }, 0o644)
}

// ToRecord converts annotations of a record sampled at rateHz to the
// record's annotations: Code the mnemonic ("N", "+", "[50]"), Text the aux
// text.
func ToRecord(anns []Annotation, rateHz float64) []record.Annotation {
	out := make([]record.Annotation, len(anns))
	for i, a := range anns {
		out[i] = record.Annotation{TS: float64(a.Sample) / rateHz, Code: Symbol(a.Code), Text: a.Aux}
	}
	return out
}

// FromRecord converts record annotations to MIT annotations at rateHz,
// times relative to t0S (the record's first frame) rounded to the nearest
// sample. A code that is a known mnemonic keeps it; any other code ("note",
// say) becomes a NOTE whose text is the code and the text. Text longer
// than 254 bytes is cut at a character boundary (the format's limit) and
// NUL bytes are dropped.
// Annotations before t0S are dropped.
func FromRecord(anns []record.Annotation, rateHz, t0S float64) []Annotation {
	var out []Annotation
	for _, a := range anns {
		if math.IsNaN(a.TS) || math.IsInf(a.TS, 0) {
			continue
		}
		s := math.Round((a.TS - t0S) * rateHz)
		if s < 0 || s > math.MaxInt32 {
			continue
		}
		code, ok := CodeOf(a.Code)
		text := a.Text
		if !ok {
			code = Note
			switch {
			case a.Code != "" && text != "":
				text = a.Code + ": " + text
			case text == "":
				text = a.Code
			}
		}
		text = strings.ReplaceAll(text, "\x00", "")
		if len(text) > 254 {
			cut := 254
			for cut > 0 && !utf8.RuneStart(text[cut]) {
				cut--
			}
			text = text[:cut]
		}
		out = append(out, Annotation{Sample: int64(s), Code: code, Aux: text})
	}
	return out
}
