package batch_test

import (
	"bufio"
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"testing"
	"time"

	"tracelift/samples"
)

// BenchmarkBatch300dpi runs the real command-line batch on copies of the
// 300-dpi demo printout (A4, 3508 × 2480 px) with 1 and 2 workers, in the
// default worker-process mode and in-process, and reports pages per minute
// and the largest peak resident memory of one page worker (worker mode).
//
//	go test -run '^$' -bench Batch300dpi -benchtime 1x ./batch
func BenchmarkBatch300dpi(b *testing.B) {
	var page []byte
	for _, d := range samples.Demo() {
		if d.Name == "hillcrest_clean_300dpi.png" {
			page = d.Data
		}
	}
	if page == nil {
		b.Fatal("no 300-dpi demo printout")
	}
	tmp := b.TempDir()
	cli := filepath.Join(tmp, "tracelift-cli")
	if out, err := exec.Command("go", "build", "-o", cli, "tracelift/cmd/tracelift-cli").CombinedOutput(); err != nil {
		b.Fatalf("building the command-line tool: %v\n%s", err, out)
	}
	const pages = 12
	in := filepath.Join(tmp, "in")
	os.MkdirAll(in, 0o755)
	for i := 0; i < pages; i++ {
		if err := os.WriteFile(filepath.Join(in, fmt.Sprintf("page%d.png", i)), page, 0o644); err != nil {
			b.Fatal(err)
		}
	}
	for _, mode := range []string{"workers", "in-process"} {
		for _, jobs := range []int{1, 2} {
			b.Run(fmt.Sprintf("%s/jobs=%d", mode, jobs), func(b *testing.B) {
				var elapsed time.Duration
				peak, cpu := 0.0, 0.0
				for i := 0; i < b.N; i++ {
					out := filepath.Join(tmp, fmt.Sprintf("out-%s-%d-%d", mode, jobs, i))
					args := []string{"batch", in, "-o", out, "--jobs", fmt.Sprint(jobs), "--quiet", "--no-resume"}
					if mode == "in-process" {
						args = append(args, "--in-process")
					}
					t0 := time.Now()
					res, err := exec.Command(cli, args...).CombinedOutput()
					elapsed += time.Since(t0)
					if err != nil {
						b.Fatalf("batch: %v\n%s", err, res)
					}
					p, c := usageOf(b, filepath.Join(out, "batch-log.jsonl"))
					peak, cpu = max(peak, p), cpu+c
				}
				b.ReportMetric(float64(pages*b.N)/elapsed.Minutes(), "pages/min")
				if mode == "workers" {
					b.ReportMetric(peak, "peakMB/worker")
					b.ReportMetric(cpu/float64(pages*b.N), "cpu-s/page")
				}
			})
		}
	}
}

// usageOf returns the largest peak memory and the summed processor time
// of the page workers in a batch log.
func usageOf(b *testing.B, log string) (peak, cpu float64) {
	f, err := os.Open(log)
	if err != nil {
		b.Fatal(err)
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		var r struct {
			Status string  `json:"status"`
			RSS    float64 `json:"peak_rss_mb"`
			CPU    float64 `json:"cpu_s"`
			Error  string  `json:"error"`
		}
		if err := json.Unmarshal(sc.Bytes(), &r); err != nil {
			b.Fatal(err)
		}
		if r.Status != "ok" {
			b.Fatalf("a page failed: %s", r.Error)
		}
		peak, cpu = max(peak, r.RSS), cpu+r.CPU
	}
	return peak, cpu
}
