package axis

import (
	"os/exec"
	"strings"
	"testing"
)

// The measurement engine stays pure: no image package, no OpenCV binding,
// no GUI toolkit anywhere in its dependency graph (DEVELOPERS.md, package
// roles).
func TestNoImageDependencies(t *testing.T) {
	out, err := exec.Command("go", "list", "-deps", "tracelift/axis").CombinedOutput()
	if err != nil {
		t.Fatalf("go list: %v\n%s", err, out)
	}
	deps := strings.Fields(string(out))
	if len(deps) < 5 {
		t.Fatalf("go list gave too little: %q", out)
	}
	for _, d := range deps {
		bad := strings.Contains(d, "gocv") || strings.Contains(d, "fyne") ||
			d == "image" || strings.HasPrefix(d, "image/") || strings.HasPrefix(d, "golang.org/x/image") ||
			strings.Contains(d, "disintegration/imaging")
		if bad {
			t.Errorf("axis depends on %s", d)
		}
	}
}
