package batch

import (
	"context"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"reflect"
	"testing"
)

// TestShardChild is not a test of its own: TestShardsAsProcesses runs the
// test binary again with these variables set, so each shard is a separate
// process as on a job array.
func TestShardChild(t *testing.T) {
	src, out, shard := os.Getenv("BATCH_CHILD_SRC"), os.Getenv("BATCH_CHILD_OUT"), os.Getenv("BATCH_CHILD_SHARD")
	if src == "" {
		t.Skip("run by TestShardsAsProcesses")
	}
	k, n, err := ParseShard(shard)
	if err != nil {
		t.Fatal(err)
	}
	ins, err := Collect(src, CollectOptions{})
	if err != nil {
		t.Fatal(err)
	}
	var fk fake
	if _, err := Run(context.Background(), Shard(ins, k, n), fk.process, Options{Out: out, Jobs: 2, ShardK: k, ShardN: n}); err != nil {
		t.Fatal(err)
	}
}

func TestShardsAsProcesses(t *testing.T) {
	if os.Getenv("BATCH_CHILD_SRC") != "" {
		t.Skip("inside a child")
	}
	src := t.TempDir()
	files := map[string]string{}
	for i := 0; i < 40; i++ {
		body := fmt.Sprintf("hr=%d", 50+i)
		if i%9 == 4 {
			body = "fail"
		}
		files[fmt.Sprintf("ward%d/p%02d.png", i%4, i)] = body
	}
	writeTree(t, src, files)
	exe, err := os.Executable()
	if err != nil {
		t.Fatal(err)
	}
	shardOut := t.TempDir()
	const n = 3
	for k := 1; k <= n; k++ {
		cmd := exec.Command(exe, "-test.run=^TestShardChild$", "-test.count=1")
		cmd.Env = append(os.Environ(), "BATCH_CHILD_SRC="+src, "BATCH_CHILD_OUT="+shardOut,
			fmt.Sprintf("BATCH_CHILD_SHARD=%d/%d", k, n))
		if b, err := cmd.CombinedOutput(); err != nil {
			t.Fatalf("shard %d/%d: %v\n%s", k, n, err, b)
		}
	}
	// One unsharded run in its own folder.
	ins, err := Collect(src, CollectOptions{})
	if err != nil {
		t.Fatal(err)
	}
	one := t.TempDir()
	var fk fake
	rep1, err := Run(context.Background(), ins, fk.process, Options{Out: one, Jobs: 2})
	if err != nil {
		t.Fatal(err)
	}
	paths, err := FindSummaries([]string{shardOut})
	if err != nil || len(paths) != n {
		t.Fatalf("shard summaries %v, %v", paths, err)
	}
	var all []string
	for _, in := range ins {
		all = append(all, in.Rel)
	}
	rep, err := Merge(paths, all)
	if err != nil {
		t.Fatal(err)
	}
	if len(rep.Duplicates) != 0 || len(rep.MissingShards) != 0 || len(rep.MissingFiles) != 0 {
		t.Fatalf("shards overlap or miss: %+v", rep)
	}
	single := readSummaryFile(t, rep1.SummaryPath)
	if len(single) != len(rep.Rows) {
		t.Fatalf("merged %d rows, unsharded %d", len(rep.Rows), len(single))
	}
	for i := range single {
		a, b := single[i], rep.Rows[i]
		a.Seconds, b.Seconds = 0, 0
		if !reflect.DeepEqual(a.record(), b.record()) {
			t.Errorf("row %d: unsharded %v, merged %v", i, a.record(), b.record())
		}
	}
	// And the outputs themselves: the same files in both trees (the log
	// and summaries at the top differ by name, so only folders are listed).
	list := func(root string) []string {
		var out []string
		filepath.WalkDir(root, func(p string, d os.DirEntry, err error) error {
			if r, _ := filepath.Rel(root, p); err == nil && !d.IsDir() && filepath.Dir(r) != "." {
				out = append(out, r)
			}
			return nil
		})
		return out
	}
	if a, b := list(one), list(shardOut); !reflect.DeepEqual(a, b) {
		t.Errorf("outputs differ:\nunsharded %v\nsharded   %v", a, b)
	}
}
