package main

import (
	"bytes"
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
