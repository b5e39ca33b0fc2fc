package main

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

// mergeFixture makes small records (2 x 600 events from the shipped
// two-cycle truth) and a candidate whose fit fails (its start kab = 1e300
// gives ln L = -inf), and returns the compare arguments: two specs, the
// failing one, and two families; 6 candidates in all.
func mergeFixture(t *testing.T) (dir string, args []string) {
	t.Helper()
	dir = t.TempDir()
	recs := filepath.Join(dir, "recs.csv")
	mustRun(t, "simulate", "../../testdata/compare/truth-twocycle.toml", "--events", "600", "--records", "2", "--seed", "5", "-o", recs)
	src, err := os.ReadFile("../../testdata/compare/ring4.toml")
	if err != nil {
		t.Fatal(err)
	}
	bad := strings.Replace(strings.Replace(string(src), `name = "ring4"`, `name = "ring4bad"`, 1), "value = 1.0", "value = 1e300", 1)
	badPath := filepath.Join(dir, "bad.toml")
	if err := os.WriteFile(badPath, []byte(bad), 0o644); err != nil {
		t.Fatal(err)
	}
	return dir, []string{"compare", recs, "../../testdata/compare/ring4.toml", "../../testdata/compare/twocycle.toml", badPath, "--chains", "3", "--rings", "3", "--starts", "2", "-q"}
}

// mustRun runs a command line and returns its standard output; it fails
// the test on a non-zero exit code.
func mustRun(t *testing.T, args ...string) []byte {
	t.Helper()
	var out, errb bytes.Buffer
	if code := run(args, &out, &errb); code != 0 {
		t.Fatalf("%v: exit code %d: %s", args, code, errb.String())
	}
	return out.Bytes()
}

// runErr runs a command line that must fail with code and an error
// message containing msg.
func runErr(t *testing.T, code int, msg string, args ...string) {
	t.Helper()
	var out, errb bytes.Buffer
	if c := run(args, &out, &errb); c != code || !strings.Contains(errb.String(), msg) {
		t.Errorf("%v: exit code %d (want %d), stderr %q (want %q)", args[1:], c, code, errb.String(), msg)
	}
}

// shardRun writes the parts of an N-way split and returns their paths.
func shardRun(t *testing.T, dir, prefix string, args []string, n int, extra ...string) []string {
	t.Helper()
	var paths []string
	for i := 1; i <= n; i++ {
		p := filepath.Join(dir, fmt.Sprintf("%s%d.json", prefix, i))
		mustRun(t, append(append(slices.Clone(args), extra...), "--shard", fmt.Sprintf("%d/%d", i, n), "-o", p)...)
		paths = append(paths, p)
	}
	return paths
}

// A merge of 2 or of 3 shards prints the single run's report byte for byte,
// in the terminal format and in JSON (whose stamp carries the command
// line), the failing candidate included and marked; with --bootstrap, a
// merge of candidate shards and bootstrap shards (another split, one
// worker each) equals the single run too.
func TestMergeEqualsSingleRun(t *testing.T) {
	dir, args := mergeFixture(t)
	single := mustRun(t, args...)
	singleJSON := mustRun(t, append(slices.Clone(args), "--format", "json")...)
	if !bytes.Contains(single, []byte("ring4bad")) || !bytes.Contains(single, []byte("fit failed")) {
		t.Errorf("the failing candidate is not in the table, marked:\n%s", single)
	}
	var rep jReport
	if err := json.Unmarshal(singleJSON, &rep); err != nil {
		t.Fatal(err)
	}
	if n := len(rep.table(t, "ranking").Rows); n != 6 {
		t.Errorf("%d candidates in the ranking, want 6", n)
	}
	if v := rep.cell(t, "ranking", "twocycle", "verdict").Text; v != "consistent" {
		t.Errorf("twocycle: %s (the others must go on after a failed fit)", v)
	}
	for _, n := range []int{2, 3} {
		parts := shardRun(t, dir, fmt.Sprintf("n%d-", n), args, n)
		merged := mustRun(t, append([]string{"merge"}, parts...)...)
		if !bytes.Equal(merged, single) {
			t.Errorf("merge of %d shards differs from the single run:\n--- merge\n%s\n--- single\n%s", n, merged, single)
		}
		mergedJSON := mustRun(t, append([]string{"merge", "--format", "json"}, parts...)...)
		if !bytes.Equal(mergedJSON, singleJSON) {
			t.Errorf("merge of %d shards differs from the single run in JSON", n)
		}
	}

	boot := append(slices.Clone(args), "--bootstrap", "4")
	singleBoot := mustRun(t, boot...)
	if !bytes.Contains(singleBoot, []byte("Parametric bootstrap")) {
		t.Fatalf("no bootstrap table:\n%s", singleBoot)
	}
	cand := shardRun(t, dir, "c", args, 2)
	bparts := shardRun(t, dir, "b", boot, 3, "--fits", filepath.Join(dir, "c*.json"), "--workers", "1")
	merged := mustRun(t, append(append([]string{"merge"}, cand...), bparts...)...)
	if !bytes.Equal(merged, singleBoot) {
		t.Errorf("merge with bootstrap parts differs from the single run:\n--- merge\n%s\n--- single\n%s", merged, singleBoot)
	}
	// Without its bootstrap parts the merge says what is still to run.
	candBoot := shardRun(t, dir, "d", boot, 2)
	pending := mustRun(t, append([]string{"merge"}, candBoot...)...)
	if !bytes.Contains(pending, []byte("still to run")) {
		t.Errorf("merge of candidate parts asking for a bootstrap does not say it is pending:\n%s", pending)
	}

	// Merge refuses what does not belong together.
	runErr(t, 1, "missing candidate shard(s) 3/3", "merge", filepath.Join(dir, "n3-1.json"), filepath.Join(dir, "n3-2.json"))
	runErr(t, 1, "given twice", "merge", filepath.Join(dir, "n2-1.json"), filepath.Join(dir, "n2-1.json"), filepath.Join(dir, "n2-2.json"))
	runErr(t, 1, "different splits", "merge", filepath.Join(dir, "n2-1.json"), filepath.Join(dir, "n3-2.json"), filepath.Join(dir, "n3-3.json"))
	runErr(t, 1, "missing bootstrap shard(s) 2/3", "merge", cand[0], cand[1], bparts[0], bparts[2])
	other := shardRun(t, dir, "o", append(slices.Clone(args), "--level", "0.9"), 2)
	runErr(t, 1, "different options: --level=0.9", "merge", cand[0], other[1])
	edit := func(name string, f func(*comparePart)) string {
		p, err := readPart(cand[1])
		if err != nil {
			t.Fatal(err)
		}
		f(p)
		var b bytes.Buffer
		if err := writePart(&b, p); err != nil {
			t.Fatal(err)
		}
		path := filepath.Join(dir, name)
		if err := os.WriteFile(path, b.Bytes(), 0o644); err != nil {
			t.Fatal(err)
		}
		return path
	}
	runErr(t, 1, "written by edgewise 0.0.9 and", "merge", edit("v.json", func(p *comparePart) { p.Setup.Tool = "edgewise 0.0.9" }), cand[0])
	runErr(t, 1, "different inputs", "merge", cand[0], edit("sha.json", func(p *comparePart) { p.Setup.Inputs[0].SHA256 = strings.Repeat("0", 64) }))
	runErr(t, 1, "was interrupted", "merge", cand[0], edit("int.json", func(p *comparePart) { p.Summary.Interrupted = true }))
	runErr(t, 1, "this edgewise", "merge", cand[0], edit("fmt.json", func(p *comparePart) { p.Format = "edgewise compare part 0" }))
	runErr(t, 1, "does not belong to shard", "merge", cand[0], edit("idx.json", func(p *comparePart) { p.Summary.Candidates[0].Index = 0 }))
	notPart := filepath.Join(dir, "report.json")
	if err := os.WriteFile(notPart, singleJSON, 0o644); err != nil {
		t.Fatal(err)
	}
	runErr(t, 1, "not a compare part file", "merge", notPart)
	runErr(t, 1, "no file matches", "merge", filepath.Join(dir, "nothing*.json"))
	// Bootstrap parts made from other candidate parts.
	runErr(t, 1, "does not belong to this comparison", append(slices.Clone(boot), "--fits", other[0]+","+other[1], "--shard", "1/1")...)
}

// Bad --shard, --fits and --bootstrap values are usage errors, found
// before any work.
func TestCompareShardUsage(t *testing.T) {
	args := []string{"compare", "../../testdata/ring3-demo.csv", "../../testdata/ring3.toml"}
	for _, c := range []struct {
		extra []string
		msg   string
	}{
		{[]string{"--shard", "0/3"}, "shard 0 out of range: want 1 to 3"},
		{[]string{"--shard", "4/3"}, "shard 4 out of range"},
		{[]string{"--shard", "1/0"}, "N = 0"},
		{[]string{"--shard", "2"}, "want i/N"},
		{[]string{"--shard", "1/2", "--report", "x"}, "give --report to edgewise merge"},
		{[]string{"--shard", "1/2", "--format", "json"}, "give --format to edgewise merge"},
		{[]string{"--fits", "a.json"}, "--fits needs --shard i/N and --bootstrap B"},
		{[]string{"--bootstrap", "-1"}, "--bootstrap -1"},
	} {
		runErr(t, 2, c.msg, append(slices.Clone(args), c.extra...)...)
	}
	runErr(t, 2, "want PART.json", "merge")
}

// stampArgs leaves out exactly the output-only options, in every spelling.
func TestStampArgs(t *testing.T) {
	c := newCommand("compare", compareHelp, nil, &bytes.Buffer{}, &bytes.Buffer{})
	addCompareFlags(c)
	in := []string{"r.csv", "--shard", "1/2", "-o", "p.json", "--starts=3", "--format=json", "-fcsv", "--force", "-q", "--fits", "a,b", "--report=dir", "--seed", "4", "-w", "5", "--", "-o"}
	want := []string{"r.csv", "--starts=3", "--seed", "4", "-w", "5", "--", "-o"}
	if got := stampArgs(c.fs, in); !slices.Equal(got, want) {
		t.Errorf("stampArgs:\n got %q\nwant %q", got, want)
	}
}

// jnum keeps every float64 through JSON, NaN and infinities included.
func TestJnumRoundTrip(t *testing.T) {
	xs := []float64{0, -0.0, 1.0 / 3, math.Pi * 1e300, 5e-324, math.NaN(), math.Inf(1), math.Inf(-1), -28477.873214}
	b, err := json.Marshal(jnums(xs))
	if err != nil {
		t.Fatal(err)
	}
	var back []jnum
	if err := json.Unmarshal(b, &back); err != nil {
		t.Fatal(err)
	}
	for i, x := range xs {
		y := float64(back[i])
		if math.Float64bits(x) != math.Float64bits(y) && !(math.IsNaN(x) && math.IsNaN(y)) {
			t.Errorf("%v came back as %v (%s)", x, y, b)
		}
	}
}

// --report writes every table format, the figures as PNG and PDF and the
// plain-language summary; a second run into the non-empty folder is
// refused without --force; merge --report writes the same tables and
// summary.
func TestCompareReportDir(t *testing.T) {
	dir, args := mergeFixture(t)
	rep := filepath.Join(dir, "rep")
	mustRun(t, append(slices.Clone(args), "--report", rep, "-o", os.DevNull)...)
	magic := map[string]string{".png": "\x89PNG", ".pdf": "%PDF", ".json": "{", ".tex": "", ".csv": "#", ".md": "", ".txt": ""}
	for _, f := range reportFiles() {
		b, err := os.ReadFile(filepath.Join(rep, f))
		if err != nil {
			t.Errorf("%s: %v", f, err)
			continue
		}
		if len(b) == 0 || !bytes.HasPrefix(b, []byte(magic[filepath.Ext(f)])) {
			t.Errorf("%s: %d bytes, starts %q", f, len(b), b[:min(len(b), 8)])
		}
	}
	sum, _ := os.ReadFile(filepath.Join(rep, "summary.md"))
	for _, want := range []string{"- **twocycle** (", "**ring4**: shape test", "**chain3(A-B-C)**: the records are impossible", "## Not assessed", "**ring4bad**: fit ring4bad", "not thereby the true one, nor the only one"} {
		if !bytes.Contains(sum, []byte(want)) {
			t.Errorf("summary.md lacks %q:\n%s", want, sum)
		}
	}
	runErr(t, 1, "not empty; use --force", append(slices.Clone(args), "--report", rep)...)
	mustRun(t, append(slices.Clone(args), "--report", rep, "--force", "-o", os.DevNull)...)

	parts := shardRun(t, dir, "p", args, 2)
	rep2 := filepath.Join(dir, "rep2")
	mustRun(t, append([]string{"merge", "--report", rep2, "-o", os.DevNull}, parts...)...)
	for _, f := range []string{"table.txt", "table.json", "table.csv", "table.md", "table.tex", "summary.md"} {
		a, _ := os.ReadFile(filepath.Join(rep, f))
		b, _ := os.ReadFile(filepath.Join(rep2, f))
		if !bytes.Equal(a, b) {
			t.Errorf("%s of merge --report differs from the single run's", f)
		}
	}
}
