package models

import (
	"strings"
	"testing"
)

// TestTimeUnit: time_unit is read, written back (Parse(Write(m)) == m)
// and refused with file, line and key when it is not a plain unit name.
func TestTimeUnit(t *testing.T) {
	base := "time_unit = \"ms\"\nstates=[\"A\",\"B\"]\n[[edge]]\nbetween=[\"A\",\"B\"]\nrates=[\"k\",\"m\"]\nlabels=[\"+\",\"-\"]\n[param.k]\nvalue=1\n[param.m]\nvalue=1\n"
	m, err := Parse(strings.NewReader(base), "x.toml")
	if err != nil {
		t.Fatal(err)
	}
	if m.TimeUnit != "ms" {
		t.Fatalf("TimeUnit %q", m.TimeUnit)
	}
	checkRoundTrip(t, m)
	for _, bad := range []string{"1/ms", "m s", "(ms)", strings.Repeat("s", 17)} {
		_, err := Parse(strings.NewReader(strings.Replace(base, `"ms"`, `"`+bad+`"`, 1)), "x.toml")
		if err == nil || !strings.Contains(err.Error(), "x.toml:1: time_unit:") {
			t.Errorf("%q: %v", bad, err)
		}
	}
}
