package models

import (
	"math"
	"os"
	"reflect"
	"strings"
	"testing"
)

func TestParseRing3(t *testing.T) {
	f, err := os.Open("../testdata/ring3.toml")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	m, err := Parse(f, "ring3.toml")
	if err != nil {
		t.Fatal(err)
	}
	if len(m.Free()) != 5 || len(m.Labels) != 2 {
		t.Fatalf("free %v labels %v", m.Free(), m.Labels)
	}
	net, err := m.Network(m.Start())
	if err != nil {
		t.Fatal(err)
	}
	a := net.Affinity(net.CycleBasis()[0])
	want := math.Log(3.0 * 2.0 * 1.5 / (0.5 * 0.4 * 0.6))
	if math.Abs(math.Abs(a)-want) > 1e-12 {
		t.Fatalf("affinity %g want %g", a, want)
	}
}

// TestParseErrors: each problem is reported with its file, line and key.
func TestParseErrors(t *testing.T) {
	cases := []struct{ src, want string }{
		{"states=[\"A\",\"B\"]\n[[edge]]\nbetween=[\"A\",\"Z\"]\nrates=[\"k\",\"m\"]\nlabels=[\"+\"]\n[param.k]\nvalue=1\n[param.m]\nvalue=1\n", "x.toml:3: edge[0].between: unknown state \"Z\""},
		{"states=[\"A\",\"B\"]\n[[edge]]\nbetween=[\"A\",\"A\"]\nrates=[\"k\",\"m\"]\nlabels=[\"+\"]\n[param.k]\nvalue=1\n[param.m]\nvalue=1\n", "self-loop"},
		{"states=[\"A\",\"B\"]\n[[edge]]\nbetween=[\"A\",\"B\"]\nrates=[\"k\",\"m\"]\nlabels=[\"+\"]\n[param.k]\nvalue=-1\n[param.m]\nvalue=1\n", "x.toml:7: param.k.value: rate -1 is not a finite positive number"},
		{"states=[\"A\",\"B\"]\n[[edge]]\nbetween=[\"A\",\"B\"]\nrates=[\"k\",\"m\"]\n[param.k]\nvalue=1\n[param.m]\nvalue=1\n", "no visible label"},
		{"states=[\"A\",\"B\"]\n[[edge]]\nbetween=[\"A\",\"B\"]\nrates=[\"k\",\"m\"]\nlabels=[\"+\"]\n[param.k]\nvalue=1\n[param.m]\nvalue=1\n[param.q]\nvalue=2\n", "x.toml:10: param.q: parameter is declared but no rate or detection uses it"},
		{"states=[\"A\",\"B\",\"C\"]\n[[edge]]\nbetween=[\"A\",\"B\"]\nrates=[\"k\",\"m\"]\nlabels=[\"+\"]\n[param.k]\nvalue=1\n[param.m]\nvalue=1\n", "not strongly connected"},
		{"states=[\"A\",\"B\"]\n[[edge]]\nbetween=[\"A\",\"B\"]\nrates=[\"k\",\"m\"]\nlabels=[\"+\"]\n[[edge]]\nbetween=[\"B\",\"A\"]\nrates=[\"m\",\"k\"]\nlabels=[\"\",\"+\"]\n[param.k]\nvalue=1\n[param.m]\nvalue=1\n", "x.toml:6: edge[1]: repeats edge[0] (B-A): same states, rate names and labels"},
		{"states=[\"A\",\"B\"\n", "x.toml:1: expected a comma"},
	}
	for _, c := range cases {
		_, err := Parse(strings.NewReader(c.src), "x.toml")
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("want error containing %q, got %v", c.want, err)
		}
	}
}

// FuzzParse: the parser never panics, and an accepted spec yields a valid
// network. The seed corpus runs in CI with go test.
func FuzzParse(f *testing.F) {
	src, err := os.ReadFile("../testdata/ring3.toml")
	if err != nil {
		f.Fatal(err)
	}
	f.Add(string(src))
	for _, name := range []string{"offedge", "shared-label", "balanced", "twocycle-stall", "ring4", "twostate-parallel", "ring3-slip"} {
		more, err := os.ReadFile("../testdata/" + name + ".toml")
		if err != nil {
			f.Fatal(err)
		}
		f.Add(string(more))
	}
	f.Add("states=[\"A\",\"B\"]\n[[edge]]\nbetween=[\"A\",\"B\"]\nrates=[\"k\",\"m\"]\nlabels=[\"+\"]\n[param.k]\nvalue=1\n[param.m]\nvalue=1\n")
	f.Add("[[edge]]\n[[edge]]\n[param.\"x\"]\n")
	f.Fuzz(func(t *testing.T, s string) {
		m, err := Parse(strings.NewReader(s), "fuzz.toml")
		if err != nil {
			return
		}
		net, err := m.Network(m.Start())
		if err != nil {
			t.Fatal(err)
		}
		if err := net.Validate(); err != nil {
			t.Fatal(err)
		}
		checkRoundTrip(t, m)
	})
}

// TestWriteRoundTrip: Parse(Write(m)) == m for the shipped spec and for a
// spec with a one-way edge, a tie and an imperfect detector.
func TestWriteRoundTrip(t *testing.T) {
	src, _ := os.ReadFile("../testdata/ring3.toml")
	other := "name=\"x\"\nstates=[\"A\",\"B\",\"C\"]\n[[edge]]\nbetween=[\"A\",\"B\"]\nrates=[\"k\",\"m\"]\nlabels=[\"+\",\"\"]\n[[edge]]\nbetween=[\"B\",\"C\"]\none_way=true\nrates=[\"k\"]\nlabels=[\"+\"]\n[[edge]]\nbetween=[\"C\",\"A\"]\nrates=[\"k\",\"m\"]\n[param.k]\nvalue=0.1\n[param.m]\nvalue=3.3e-7\nfixed=true\n[label.\"+\"]\ndetect=0.95\n"
	for _, s := range []string{string(src), other} {
		m, err := Parse(strings.NewReader(s), "in.toml")
		if err != nil {
			t.Fatal(err)
		}
		checkRoundTrip(t, m)
	}
}

// checkRoundTrip fails unless Parse(Write(m)) equals m.
func checkRoundTrip(t *testing.T, m *Model) {
	t.Helper()
	var buf strings.Builder
	if err := m.Write(&buf); err != nil {
		t.Fatal(err)
	}
	back, err := Parse(strings.NewReader(buf.String()), "back.toml")
	if err != nil {
		t.Fatalf("written spec does not parse: %v\n%s", err, buf.String())
	}
	if !reflect.DeepEqual(m, back) {
		t.Fatalf("round trip changed the model:\n%+v\n%+v", m, back)
	}
}

// TestParseTypeAndNameErrors: a value of the wrong type, an unknown key in
// an array of tables, a header with a trailing comment, bad names and
// numbers out of range are all reported with file, line and full key.
func TestParseTypeAndNameErrors(t *testing.T) {
	base := "states=[\"A\",\"B\"]\n[[edge]]  # the visible step\nbetween=[\"A\",\"B\"]\nrates=[\"k\",\"m\"]\nlabels=[\"+\",\"-\"]\n[param.k]\nvalue=1\n[param.m]\nvalue=1\n"
	cases := []struct{ src, want string }{
		{strings.Replace(base, "rates=[\"k\",\"m\"]", "rates=[1, 2]", 1), "x.toml:4: edge[0].rates: item 1: want a string, not an integer"},
		{strings.Replace(base, "value=1\n[param.m]", "value=\"fast\"\n[param.m]", 1), "x.toml:7: param.k.value: want a number, not a string"},
		{strings.Replace(base, "states=[\"A\",\"B\"]", "states=\"A\"", 1), "x.toml:1: states: want a list of strings, not a string"},
		{strings.Replace(base, "labels=", "lables=", 1), "x.toml:5: edge[0].lables: unknown key"},
		{strings.Replace(base, "between=[\"A\",\"B\"]", "between=[\"A\",\"Z\"]", 1), "x.toml:3: edge[0].between: unknown state \"Z\""},
		{"label = \"x\"\n" + base, "x.toml:1: label: want a table, not a string"},
		{strings.Replace(base, "\"+\",\"-\"", "\"end\",\"-\"", 1), "edge[0].labels: label \"end\" is reserved"},
		{strings.Replace(base, "\"+\",\"-\"", "\"a,b\",\"-\"", 1), "edge[0].labels: label \"a,b\" contains a comma"},
		{strings.Replace(base, "states=[\"A\",\"B\"]", "states=[\"A\",\"\"]", 1), "states: state name \"\" is empty"},
		{strings.Replace(base, "value=1\n[param.m]", "value=1e-320\n[param.m]", 1), "x.toml:7: param.k.value: rate 1e-320 is not a finite positive number of normal size"},
	}
	for _, c := range cases {
		_, err := Parse(strings.NewReader(c.src), "x.toml")
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("want error containing %q, got %v", c.want, err)
		}
	}
	if _, err := Parse(strings.NewReader(base), "x.toml"); err != nil {
		t.Fatalf("base spec rejected: %v", err)
	}
	// A solved rate out of floating-point range points at its constraint.
	big := "states=[\"A\",\"B\",\"C\"]\n[[edge]]\nbetween=[\"A\",\"B\"]\nrates=[\"k\",\"m\"]\nlabels=[\"+\",\"-\"]\n[[edge]]\nbetween=[\"B\",\"C\"]\nrates=[\"k\",\"m\"]\n[[edge]]\nbetween=[\"C\",\"A\"]\nrates=[\"u\",\"w\"]\n[param.k]\nvalue=1\n[param.m]\nvalue=1\n[param.w]\nvalue=1\n[[affinity]]\ncycle=[\"A\",\"B\",\"C\",\"A\"]\nvalue=1500\nsolve=\"u\"\n"
	if _, err := Parse(strings.NewReader(big), "x.toml"); err == nil || !strings.Contains(err.Error(), "x.toml:20: affinity[0].value: solved rate u = exp(1500) is out of floating-point range") {
		t.Errorf("overflow: got %v", err)
	}
}

// TestWriteEscapesLikeTOML: control characters in a description survive
// the round trip (TOML has no \a or \x escapes).
func TestWriteEscapesLikeTOML(t *testing.T) {
	f, _ := os.ReadFile("../testdata/ring3.toml")
	m, err := Parse(strings.NewReader(string(f)), "ring3.toml")
	if err != nil {
		t.Fatal(err)
	}
	m.Description = "bell \a, tab \t, quote \", backslash \\, nul \x00, del \x7f, é"
	checkRoundTrip(t, m)
}
