package axis

import (
	"encoding/binary"
	"math"
	"testing"

	"tracelift/record"
	"tracelift/samples/dipole"
)

// FuzzMeasure feeds arbitrary samples, rates and windows to Measure: it
// must return findings or an error, never panic or hang.
func FuzzMeasure(f *testing.F) {
	rec := dipole.Generate(dipole.Params{DurationS: 3, RateHz: 250})
	var buf []byte
	for _, v := range rec.Lead("II").MV[:400] {
		buf = binary.LittleEndian.AppendUint16(buf, uint16(int16(v*1000)))
	}
	f.Add(buf, uint16(250), uint8(3), uint8(0))
	f.Add([]byte{1, 2, 3}, uint16(500), uint8(1), uint8(7))
	f.Fuzz(func(t *testing.T, data []byte, rate uint16, nlead, gapEvery uint8) {
		if len(data) > 1<<16 {
			return
		}
		n := len(data) / 2
		base := make([]float64, n)
		for i := range n {
			base[i] = float64(int16(binary.LittleEndian.Uint16(data[2*i:]))) / 1000
			if gapEvery > 0 && i%int(gapEvery) == 0 && i%3 == 0 {
				base[i] = math.NaN()
			}
		}
		// Tile to a few seconds so the detector has something to chew on.
		hz := float64(rate%600) + 1
		var mv []float64
		for len(mv) < int(4*hz) && n > 0 {
			mv = append(mv, base...)
		}
		r := &record.Record{}
		for l := range int(nlead%12) + 1 {
			r.Signals = append(r.Signals, record.Signal{Lead: record.Standard12[l], RateHz: hz, StartS: float64(l % 4), MV: mv})
		}
		fd, err := Measure(r, Options{})
		if err == nil {
			_ = fd.Summary()
		}
	})
}
