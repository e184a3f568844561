package compare

import (
	"os/exec"
	"strings"
	"testing"
)

// The comparison engine stays pure like the measurement engine: no image
// package, no OpenCV binding, no GUI toolkit in its dependency graph
// (DEVELOPERS.md, package roles).
func TestNoImageDependencies(t *testing.T) {
	out, err := exec.Command("go", "list", "-deps", "tracelift/compare").CombinedOutput()
	if err != nil {
		t.Fatalf("go list: %v\n%s", err, out)
	}
	deps := strings.Fields(string(out))
	if len(deps) < 5 {
		t.Fatalf("go list gave too little: %q", out)
	}
	for _, d := range deps {
		if strings.Contains(d, "gocv") || strings.Contains(d, "fyne") || d == "image" ||
			strings.HasPrefix(d, "image/") || strings.HasPrefix(d, "golang.org/x/image") {
			t.Errorf("compare depends on %s", d)
		}
	}
}
