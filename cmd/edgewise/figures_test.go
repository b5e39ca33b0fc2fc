package main

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestFluctFigures: the three figures are written in PNG, SVG and PDF,
// non-empty, with the format's signature (PNG: the 8-byte signature of
// ISO/IEC 15948; SVG: an <svg element; PDF: "%PDF-"), are not replaced
// without --force, and are replaced with it; both widths work; a path
// given to two options is refused before any work.
func TestFluctFigures(t *testing.T) {
	dir := t.TempDir()
	sig := map[string][]byte{".png": []byte("\x89PNG\r\n\x1a\n"), ".svg": []byte("<svg"), ".pdf": []byte("%PDF-")}
	for ext, magic := range sig {
		pl, hi, pn := filepath.Join(dir, "fluct"+ext), filepath.Join(dir, "gaps"+ext), filepath.Join(dir, "pn"+ext)
		var out, errb bytes.Buffer
		args := []string{"fluct", demo, "--windows", "3,5,100", "--fixed-time", "--boot", "20", "--plot", pl, "--hist", hi, "--pn", pn, "--figure-width", "183"}
		if code := run(args, &out, &errb); code != 0 {
			t.Fatalf("%s: code %d: %s", ext, code, errb.String())
		}
		for _, p := range []string{pl, hi, pn} {
			b, err := os.ReadFile(p)
			if err != nil {
				t.Fatal(err)
			}
			head := b[:min(len(b), 512)]
			if len(b) < 1000 || (ext == ".svg" && !bytes.Contains(head, magic)) || (ext != ".svg" && !bytes.HasPrefix(b, magic)) {
				t.Errorf("%s: %d bytes, head %q", p, len(b), head[:min(len(head), 16)])
			}
		}
		if ext == ".svg" {
			b, _ := os.ReadFile(pn)
			if !bytes.Contains(b, []byte("no windows with c &lt; 0 at n = 100")) && !bytes.Contains(b, []byte("no windows with c < 0 at n = 100")) {
				t.Error("P_n(c) figure does not say that n = 100 has no negative currents")
			}
		}
		before, _ := os.ReadFile(pl)
		if code := run(args, &out, &errb); code != 1 {
			t.Errorf("%s: overwrite without --force: code %d", ext, code)
		}
		if after, _ := os.ReadFile(pl); !bytes.Equal(before, after) {
			t.Errorf("%s: file changed without --force", ext)
		}
		if code := run(append(args, "--force", "--figure-width", "89"), &out, &errb); code != 0 {
			t.Errorf("%s: --force: code %d: %s", ext, code, errb.String())
		}
	}
	left, _ := filepath.Glob(filepath.Join(dir, ".*tmp*"))
	if len(left) > 0 {
		t.Errorf("temporary files left: %v", left)
	}
	// -o X --plot X: refused before any work, nothing left behind.
	x := filepath.Join(dir, "x.svg")
	var out, errb bytes.Buffer
	if code := run([]string{"fluct", demo, "--windows", "3", "-o", x, "--plot", x}, &out, &errb); code != 1 || !strings.Contains(errb.String(), "both write") {
		t.Errorf("clash: code %d: %s", code, errb.String())
	}
	if _, err := os.Stat(x); err == nil {
		t.Error("clashing output left behind")
	}
}

// TestIntTicks: integer ticks keep the parity of n and label at most
// about eight values.
func TestIntTicks(t *testing.T) {
	labels := func(tk intTicks, lo, hi float64) []string {
		var out []string
		for _, x := range tk.Ticks(lo, hi) {
			if x.Label != "" {
				out = append(out, x.Label)
			}
		}
		return out
	}
	if got := labels(intTicks{parity: 1}, -1.5, 5.5); len(got) != 4 || got[0] != "-1" || got[3] != "5" {
		t.Errorf("odd parity: %v", got)
	}
	if got := labels(intTicks{parity: -1}, 0, 100); len(got) > 11 || len(got) < 5 {
		t.Errorf("long axis: %v", got)
	}
}

// TestPlainLogTicks: decades are labelled in plain numbers where they fit.
func TestPlainLogTicks(t *testing.T) {
	var got []string
	for _, tk := range (plainLogTicks{}).Ticks(1e-6, 100) {
		if tk.Label != "" {
			got = append(got, tk.Label)
		}
	}
	if strings.Join(got, " ") != "1e-06 1e-05 0.0001 0.001 0.01 0.1 1 10 100" {
		t.Errorf("%v", got)
	}
}
