package main

import (
	"bytes"
	"encoding/csv"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// bench --truth-calib traces the clean case 0 of seed 1 at 300 dpi on the
// renderer's own calibration: no scale or rotation error, no lead missing,
// and a median SNR against the drawn signals of at least 25 dB, the
// project's accuracy target for a clean 300-dpi scan (the one
// pipeline's TestDemosEndToEnd holds the demos to; 26.0 dB when written).
func TestBenchTruthCalib(t *testing.T) {
	if testing.Short() {
		t.Skip("renders and reads a page")
	}
	path := filepath.Join(t.TempDir(), "cases.csv")
	var out, errb bytes.Buffer
	args := []string{"bench", "--truth-calib", "--cases", "1", "--dpi", "300", "--ptb", "", "--csv", path}
	if code := run(args, &out, &errb); code != 0 {
		t.Fatalf("exit %d: %s", code, errb.String())
	}
	if !strings.Contains(out.String(), "calibration: from the renderer's truth") {
		t.Errorf("the table does not say where the calibration came from:\n%s", out.String())
	}
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil || len(rows) != 2 {
		t.Fatalf("%d rows, %v", len(rows), err)
	}
	col := map[string]string{}
	for i, h := range rows[0] {
		col[h] = rows[1][i]
	}
	if col["error"] != "" || col["scale_err_x"] != "0.0000" || col["rot_err_deg"] != "0.0000" || col["missing"] != "0" {
		t.Errorf("case 0: %v", col)
	}
	if v, _ := strconv.ParseFloat(col["snr_median_db"], 64); v < 25 {
		t.Errorf("clean 300-dpi page on the truth's calibration: median SNR %.1f dB, want ≥ 25", v)
	}
}
