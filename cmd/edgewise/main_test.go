package main

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func TestRunExitCodes(t *testing.T) {
	var out, errb bytes.Buffer
	if code := run([]string{"version"}, &out, &errb); code != 0 || !strings.Contains(out.String(), version) {
		t.Fatalf("version: code %d out %q", code, out.String())
	}
	if code := run(nil, &out, &errb); code != 2 {
		t.Fatalf("no command: code %d, want 2", code)
	}
	if code := run([]string{"nonsense"}, &out, &errb); code != 2 {
		t.Fatalf("unknown command: code %d, want 2", code)
	}
}

// TestDescribeRing3: the cycle affinity of the shipped ring equals
// ln(3*2*1.5/(0.5*0.4*0.6)) = 4.31749 (cycle affinity definition,
// Schnakenberg, Rev. Mod. Phys. 48, 571 (1976)), in every format.
func TestDescribeRing3(t *testing.T) {
	for _, f := range []string{"table", "markdown", "csv", "json"} {
		var out, errb bytes.Buffer
		if code := run([]string{"describe", "../../testdata/ring3.toml", "--format", f}, &out, &errb); code != 0 {
			t.Fatalf("%s: code %d: %s", f, code, errb.String())
		}
		if !strings.Contains(out.String(), "4.31749") {
			t.Errorf("%s: affinity missing:\n%s", f, out.String())
		}
	}
	var out, errb bytes.Buffer
	if code := run([]string{"describe", "missing.toml"}, &out, &errb); code != 1 {
		t.Errorf("missing file: code %d, want 1", code)
	}
	if code := run([]string{"describe", "--format", "nope", "../../testdata/ring3.toml"}, &out, &errb); code != 2 {
		t.Errorf("bad format: code %d, want 2", code)
	}
	if code := run([]string{"describe", "--help"}, &out, &errb); code != 0 || !strings.Contains(out.String(), "Example:") {
		t.Errorf("help: code %d", code)
	}
}

// TestSimulateDeterministicAndSafe: the same seed gives byte-identical
// files, an existing file is kept without --force, and the event count is
// as asked.
func TestSimulateDeterministicAndSafe(t *testing.T) {
	dir := t.TempDir()
	a, b := filepath.Join(dir, "a.csv"), filepath.Join(dir, "b.csv")
	var out, errb bytes.Buffer
	for _, p := range []string{a, b} {
		if code := run([]string{"simulate", "../../testdata/ring3.toml", "-n", "500", "-r", "3", "--seed", "9", "-o", p}, &out, &errb); code != 0 {
			t.Fatalf("code %d: %s", code, errb.String())
		}
	}
	x, _ := os.ReadFile(a)
	y, _ := os.ReadFile(b)
	if !bytes.Equal(x, y) {
		t.Fatal("same seed, different output")
	}
	if n := strings.Count(string(x), "\n"); n != 2+1500 {
		t.Fatalf("%d lines, want 1502", n)
	}
	if code := run([]string{"simulate", "../../testdata/ring3.toml", "-o", a}, &out, &errb); code != 1 {
		t.Fatalf("overwrite without --force: code %d", code)
	}
	y, _ = os.ReadFile(a)
	if !bytes.Equal(x, y) {
		t.Fatal("file changed without --force")
	}
}
