package model

import (
	"os/exec"
	"strings"
	"testing"
)

// The model stays toolkit-free (DEVELOPERS.md: gui/model has no fyne
// import), so its tests run with plain go test.
func TestNoToolkitImport(t *testing.T) {
	out, err := exec.Command("go", "list", "-deps", ".").Output()
	if err != nil {
		t.Skipf("go list unavailable: %v", err)
	}
	for _, p := range strings.Fields(string(out)) {
		if strings.HasPrefix(p, "fyne.io/") || strings.HasPrefix(p, "gocv.io/") {
			t.Fatalf("gui/model depends on %s", p)
		}
	}
}
