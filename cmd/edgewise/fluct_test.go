package main

import (
	"bytes"
	"encoding/json"
	"os"
	"strconv"
	"strings"
	"testing"
)

const demo = "../../testdata/ring3-demo.csv"

// TestFluctCommand: the worked example runs in every format and shows the
// verdicts, the bounds and the cautions; the ring's post-selected slope at
// n = 3 agrees with F (exact for a ring, Polettini and Esposito 2017).
func TestFluctCommand(t *testing.T) {
	for _, f := range []string{"table", "markdown", "latex", "csv", "json"} {
		var out, errb bytes.Buffer
		code := run([]string{"fluct", demo, "--windows", "3,5", "--fixed-time", "--bounds", "--boot", "50", "--format", f}, &out, &errb)
		if code != 0 {
			t.Fatalf("%s: code %d: %s", f, code, errb.String())
		}
		s := out.String()
		for _, want := range []string{"post-selected", "fixed time", "F*J", "uncertainty relation", "stationarity"} {
			if want == "stationarity" && f == "csv" {
				continue // the csv rendering carries tables only
			}
			if !strings.Contains(s, want) {
				t.Errorf("%s: %q missing", f, want)
			}
		}
	}
	var out, errb bytes.Buffer
	if code := run([]string{"fluct", demo, "--windows", "3", "--post-select", "only", "--format", "json", "--boot", "50"}, &out, &errb); code != 0 {
		t.Fatalf("code %d: %s", code, errb.String())
	}
	var rep report
	if err := json.Unmarshal(out.Bytes(), &rep); err != nil {
		t.Fatal(err)
	}
	rows := rep.Tables[0].Rows
	if len(rows) != 1 || rows[0][1] != "post-selected" || !strings.Contains(rows[0][len(rows[0])-1], "no evidence against slope = F") {
		t.Errorf("rows %v", rows)
	}
	if rep.Seed != "1" || len(rep.Checksum) != 64 {
		t.Errorf("stamp: seed %q checksum %q", rep.Seed, rep.Checksum)
	}
}

// TestFluctStdin: "-" reads standard input and stamps the same checksum as
// the file.
func TestFluctStdin(t *testing.T) {
	f, err := os.Open(demo)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	old := os.Stdin
	os.Stdin = f
	defer func() { os.Stdin = old }()
	var a, b, errb bytes.Buffer
	if code := run([]string{"fluct", "-", "--windows", "3", "--format", "json"}, &a, &errb); code != 0 {
		t.Fatalf("stdin: code %d: %s", code, errb.String())
	}
	if code := run([]string{"fluct", demo, "--windows", "3", "--format", "json"}, &b, &errb); code != 0 {
		t.Fatalf("file: code %d: %s", code, errb.String())
	}
	var ra, rb report
	if json.Unmarshal(a.Bytes(), &ra) != nil || json.Unmarshal(b.Bytes(), &rb) != nil || ra.Checksum != rb.Checksum {
		t.Errorf("checksums %q and %q", ra.Checksum, rb.Checksum)
	}
}

// TestFluctUsage: help with a worked example; bad options are usage
// errors (2), a missing file a failure (1).
func TestFluctUsage(t *testing.T) {
	var out, errb bytes.Buffer
	if code := run([]string{"fluct", "--help"}, &out, &errb); code != 0 || !strings.Contains(out.String(), "Example:") || !strings.Contains(out.String(), "ring3-demo.csv") {
		t.Errorf("help: code %d", code)
	}
	for _, args := range [][]string{
		{"fluct", demo, "--windows", "0"},
		{"fluct", demo, "--windows", "a"},
		{"fluct", demo, "--post-select", "some"},
		{"fluct", demo, "--edge", "+"},
		{"fluct", demo, "--plot", "x.gif"},
		{"fluct"},
	} {
		if code := run(args, &out, &errb); code != 2 {
			t.Errorf("%v: code %d, want 2", args, code)
		}
	}
	if code := run([]string{"fluct", "missing.csv"}, &out, &errb); code != 1 {
		t.Errorf("missing file: code %d, want 1", code)
	}
	if code := run([]string{"fluct", demo, "--edge", "a,b"}, &out, &errb); code != 1 || !strings.Contains(errb.String(), "not both in") {
		t.Errorf("unknown labels: code %d: %s", code, errb.String())
	}
}

// TestInspectFluctSameD: inspect and fluct --bounds use one estimator of
// the current's diffusion coefficient, so on the same file with the same
// seed and replicate count they print the same D, SE, interval and method
// (and the same J). The value must also be a number, so that agreement
// of two "n/a" rows cannot pass.
func TestInspectFluctSameD(t *testing.T) {
	find := func(rep report, prefix string) []string {
		for _, tb := range rep.Tables {
			for _, r := range tb.Rows {
				if strings.HasPrefix(r[0], prefix) {
					return r
				}
			}
		}
		t.Fatalf("no row %q", prefix)
		return nil
	}
	var a, b, errb bytes.Buffer
	if code := run([]string{"inspect", demo, "--seed", "3", "--boot", "150", "--shape-resamples", "0", "--format", "json"}, &a, &errb); code != 0 {
		t.Fatalf("inspect: code %d: %s", code, errb.String())
	}
	if code := run([]string{"fluct", demo, "--windows", "3", "--bounds", "--seed", "3", "--boot", "150", "--format", "json"}, &b, &errb); code != 0 {
		t.Fatalf("fluct: code %d: %s", code, errb.String())
	}
	var ra, rb report
	if err := json.Unmarshal(a.Bytes(), &ra); err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b.Bytes(), &rb); err != nil {
		t.Fatal(err)
	}
	di, df := find(ra, "diffusion coefficient D"), find(rb, "diffusion coefficient D")
	if strings.Join(di[1:5], "|") != strings.Join(df[1:5], "|") {
		t.Errorf("D differs:\n inspect %q\n fluct   %q", di, df)
	}
	if _, err := strconv.ParseFloat(di[1], 64); err != nil || !strings.Contains(di[4], "jackknife") {
		t.Errorf("D row %q: not a number or not the jackknife interval", di)
	}
	ji, jf := find(ra, "current J"), find(rb, "visible current J")
	if strings.Join(ji[1:5], "|") != strings.Join(jf[1:5], "|") {
		t.Errorf("J differs:\n inspect %q\n fluct   %q", ji, jf)
	}
	t.Logf("D: %q", di[1:5])
}

// TestFluctBoundsWithheld: an instrument stated to break the bounds
// (--dead-time, unequal --detect, --multi-edge) withholds them with the
// reason, through infer.BoundsValid; a bad --detect is a usage error.
func TestFluctBoundsWithheld(t *testing.T) {
	for _, flag := range [][]string{{"--dead-time", "0.05"}, {"--detect", "0.9,0.8"}, {"--multi-edge"}} {
		var out, errb bytes.Buffer
		args := append([]string{"fluct", demo, "--windows", "5", "--bounds", "--format", "json"}, flag...)
		if code := run(args, &out, &errb); code != 0 {
			t.Fatalf("%v: code %d: %s", flag, code, errb.String())
		}
		var rep report
		if err := json.Unmarshal(out.Bytes(), &rep); err != nil {
			t.Fatal(err)
		}
		withheld := false
		for _, n := range rep.Notes {
			withheld = withheld || strings.HasPrefix(n, "entropy-production bounds withheld:")
		}
		for _, tb := range rep.Tables {
			for _, r := range tb.Rows {
				if strings.HasPrefix(r[0], "bound F*J") && (r[1] != "n/a" || !strings.Contains(r[5], "withheld")) {
					t.Errorf("%v: F*J row %q", flag, r)
				}
			}
		}
		if !withheld {
			t.Errorf("%v: no withholding note: %q", flag, rep.Notes)
		}
	}
	var out, errb bytes.Buffer
	if code := run([]string{"fluct", demo, "--bounds", "--detect", "1.2,0.5"}, &out, &errb); code != 2 {
		t.Errorf("bad --detect: code %d", code)
	}
}
