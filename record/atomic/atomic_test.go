package atomic

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"
)

func TestWriteFileReplaces(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	p := filepath.Join(dir, "a.txt")
	for _, s := range []string{"first", "second, longer content", "3"} {
		err := WriteFile(p, func(w io.Writer) error { _, err := io.WriteString(w, s); return err }, 0o644)
		if err != nil {
			t.Fatal(err)
		}
		b, err := os.ReadFile(p)
		if err != nil {
			t.Fatal(err)
		}
		if string(b) != s {
			t.Fatalf("content %q want %q", b, s)
		}
	}
	fi, _ := os.Stat(p)
	if fi.Mode().Perm()&0o600 != 0o600 {
		t.Fatalf("mode %v", fi.Mode())
	}
	assertOnly(t, dir, "a.txt")
}

func TestWriteFileErrorKeepsOld(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	p := filepath.Join(dir, "a.txt")
	if err := os.WriteFile(p, []byte("old"), 0o644); err != nil {
		t.Fatal(err)
	}
	boom := errors.New("boom")
	err := WriteFile(p, func(w io.Writer) error {
		io.WriteString(w, "half of the new")
		return boom
	}, 0o644)
	if !errors.Is(err, boom) || !strings.HasPrefix(err.Error(), "atomic: ") {
		t.Fatalf("err %v", err)
	}
	b, _ := os.ReadFile(p)
	if string(b) != "old" {
		t.Fatalf("old file changed: %q", b)
	}
	assertOnly(t, dir, "a.txt")

	// A missing directory is an error, not a panic.
	if err := WriteFile(filepath.Join(dir, "no", "x"), func(io.Writer) error { return nil }, 0o644); err == nil {
		t.Fatal("no error for missing directory")
	}
	// A rename onto a directory fails and leaves no temporary file.
	sub := filepath.Join(dir, "d")
	os.Mkdir(sub, 0o755)
	os.WriteFile(filepath.Join(sub, "keep"), nil, 0o644)
	if err := WriteFile(sub, func(w io.Writer) error { return nil }, 0o644); err == nil {
		t.Fatal("renaming over a non-empty directory succeeded")
	}
	assertOnly(t, dir, "a.txt", "d")
}

func assertOnly(t *testing.T, dir string, names ...string) {
	t.Helper()
	ents, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	var got []string
	for _, e := range ents {
		got = append(got, e.Name())
	}
	if strings.Join(got, ",") != strings.Join(names, ",") {
		t.Fatalf("directory holds %v, want %v", got, names)
	}
}

// version builds a self-checking file: a body of n lines and a last line
// "len <bytes> sha256 <hex>" over the body. A torn or mixed file fails
// checkVersion.
func version(k int, rng *rand.Rand) []byte {
	var b bytes.Buffer
	n := 1 + rng.IntN(3000) // up to ~100 kB, so writes span several pages
	for i := 0; i < n; i++ {
		fmt.Fprintf(&b, "version %d line %d %x\n", k, i, rng.Uint64())
	}
	sum := sha256.Sum256(b.Bytes())
	fmt.Fprintf(&b, "len %d sha256 %s\n", b.Len(), hex.EncodeToString(sum[:]))
	return b.Bytes()
}

func checkVersion(b []byte) error {
	body := bytes.TrimSuffix(b, []byte("\n"))
	i := bytes.LastIndexByte(body, '\n')
	if i < 0 {
		return fmt.Errorf("no trailer in %d bytes", len(b))
	}
	body, trailer := b[:i+1], string(body[i+1:])
	var n int
	var h string
	if _, err := fmt.Sscanf(trailer, "len %d sha256 %s", &n, &h); err != nil {
		return fmt.Errorf("bad trailer %q", trailer)
	}
	sum := sha256.Sum256(body)
	if n != len(body) || h != hex.EncodeToString(sum[:]) {
		return fmt.Errorf("trailer does not match the body (%d bytes, trailer says %d)", len(body), n)
	}
	return nil
}

const helperEnv = "TRACELIFT_ATOMIC_HELPER"

// TestHelperWriter is not a test on its own: run by TestCrashSafety as a
// child process, it rewrites the file named in the environment forever.
func TestHelperWriter(t *testing.T) {
	p := os.Getenv(helperEnv)
	if p == "" {
		t.Skip("helper process only")
	}
	rng := rand.New(rand.NewPCG(uint64(os.Getpid()), uint64(time.Now().UnixNano())))
	fmt.Println("ready") // the parent times its kill from here, not from exec
	for k := 0; ; k++ {
		v := version(k, rng)
		// Write in small pieces so a kill can land in the middle.
		err := WriteFile(p, func(w io.Writer) error {
			for len(v) > 0 {
				m := min(len(v), 4096)
				if _, err := w.Write(v[:m]); err != nil {
					return err
				}
				v = v[m:]
			}
			return nil
		}, 0o644)
		if err != nil {
			fmt.Fprintln(os.Stderr, err)
			os.Exit(3)
		}
	}
}

// TestCrashSafety kills a writer with SIGKILL at random moments and checks
// the file is always one whole version. This is the property promised by
// rename(2) in POSIX: "If the link named by the new argument exists, it
// shall be removed and old renamed to new ... there shall be no point at
// which new does not exist."
func TestCrashSafety(t *testing.T) {
	if os.Getenv(helperEnv) != "" {
		t.Skip("inside helper")
	}
	exe, err := os.Executable()
	if err != nil {
		t.Skip(err)
	}
	dir := t.TempDir()
	p := filepath.Join(dir, "state.txt")
	rng := rand.New(rand.NewPCG(1, 2))
	if err := os.WriteFile(p, version(-1, rng), 0o644); err != nil {
		t.Fatal(err)
	}
	kills := 30
	if testing.Short() {
		kills = 8
	}
	deadline := time.Now().Add(40 * time.Second)
	changed := 0
	for i := 0; i < kills && time.Now().Before(deadline); i++ {
		before, _ := os.ReadFile(p)
		cmd := exec.Command(exe, "-test.run=^TestHelperWriter$")
		cmd.Env = append(os.Environ(), helperEnv+"="+p)
		var stderr bytes.Buffer
		cmd.Stderr = &stderr
		stdout, err := cmd.StdoutPipe()
		if err != nil {
			t.Fatal(err)
		}
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		ready, drained := make(chan struct{}), make(chan struct{})
		go func() {
			b := make([]byte, 6)
			io.ReadFull(stdout, b)
			close(ready)
			io.Copy(io.Discard, stdout) // ends when the killed helper's pipe closes
			close(drained)
		}()
		select {
		case <-ready:
		case <-time.After(20 * time.Second): // a loaded machine; kill anyway
		}
		time.Sleep(time.Duration(1+rng.IntN(100)) * time.Millisecond)
		cmd.Process.Signal(syscall.SIGKILL)
		<-drained // all reads done before Wait, as os/exec requires
		err = cmd.Wait()
		var ee *exec.ExitError
		if errors.As(err, &ee) {
			if ws, ok := ee.Sys().(syscall.WaitStatus); ok && ws.Exited() {
				t.Fatalf("helper exited by itself (%d): %s", ws.ExitStatus(), stderr.String())
			}
		}
		b, err := os.ReadFile(p)
		if err != nil {
			t.Fatalf("kill %d: file missing: %v", i, err)
		}
		if err := checkVersion(b); err != nil {
			t.Fatalf("kill %d: torn file: %v", i, err)
		}
		if !bytes.Equal(b, before) {
			changed++
		}
	}
	if changed == 0 {
		t.Fatal("the helper never completed a write; the test checked nothing")
	}
	t.Logf("%d of %d kills saw a new version", changed, kills)
	// Temporaries of killed writers may remain (a crash cannot clean up);
	// they never hide the target and are dot-named.
	ents, _ := os.ReadDir(dir)
	for _, e := range ents {
		if e.Name() != "state.txt" && !strings.HasPrefix(e.Name(), ".state.txt.tmp-") {
			t.Fatalf("unexpected file %s", e.Name())
		}
	}
}
