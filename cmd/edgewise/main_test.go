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
