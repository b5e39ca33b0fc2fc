package main

import (
	"bytes"
	"flag"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"unicode/utf8"

	"edgewise/cmd/edgewise/internal/output"
	"edgewise/infer"
	"edgewise/likelihood"

	"github.com/santhosh-tekuri/jsonschema/v6"
)

var update = flag.Bool("update", false, "rewrite the golden files of testdata/golden")

// goldenCases are the command lines of the golden files: one per command,
// each rendered in every format (simulate writes records only).
var goldenCases = []struct {
	name string
	args []string
}{
	{"describe", []string{"describe", "../../testdata/offedge.toml"}},
	{"inspect", []string{"inspect", "../../testdata/ring3-demo.csv", "--boot", "40", "--shape-resamples", "19", "--seed", "2", "--per-record"}},
	{"fluct", []string{"fluct", "../../testdata/ring4-demo.csv", "--windows", "5,20", "--fixed-time", "--bounds", "--boot", "40"}},
	{"predict", []string{"predict", "../../testdata/ring3-demo.csv", "../../testdata/ring3.toml", "--windows", "5,20"}},
}

var allFormats = []string{"table", "markdown", "latex", "csv", "json"}

var formatExt = map[string]string{"table": "txt", "markdown": "md", "latex": "tex", "csv": "csv", "json": "json"}

// runOut runs a command and returns its standard output.
func runOut(t *testing.T, args ...string) []byte {
	t.Helper()
	var out, errb bytes.Buffer
	if code := run(args, &out, &errb); code != 0 {
		t.Fatalf("%v: code %d: %s", args, code, errb.String())
	}
	return out.Bytes()
}

// TestGolden: every command in every format gives the reviewed output
// under testdata/golden (go test -run TestGolden -update rewrites it; the
// diff is reviewed in the commit).
func TestGolden(t *testing.T) {
	t.Setenv("COLUMNS", "")
	check := func(name string, got []byte) {
		path := filepath.Join("testdata", "golden", name)
		if *update {
			if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
				t.Fatal(err)
			}
			if err := os.WriteFile(path, got, 0o644); err != nil {
				t.Fatal(err)
			}
			return
		}
		want, err := os.ReadFile(path)
		if err != nil {
			t.Fatalf("%v (run go test -run TestGolden -update)", err)
		}
		if !bytes.Equal(got, want) {
			t.Errorf("%s differs from the golden file (go test -run TestGolden -update, then review the diff)", name)
		}
	}
	for _, c := range goldenCases {
		for _, f := range allFormats {
			check(c.name+"."+formatExt[f], runOut(t, append(c.args, "--format", f)...))
		}
	}
	check("simulate.csv", runOut(t, "simulate", "../../testdata/balanced.toml", "-n", "10", "-r", "2", "--seed", "5", "--time-unit", "ms"))
}

// TestJSONSchema: the JSON output of every command, in several variants,
// is valid against its schema under docs/schema (JSON Schema 2020-12).
func TestJSONSchema(t *testing.T) {
	c := jsonschema.NewCompiler()
	schemas := map[string]*jsonschema.Schema{}
	for _, cmd := range []string{"describe", "inspect", "fluct", "predict", "fit", "compare", "plan"} {
		s, err := c.Compile(filepath.Join("..", "..", "docs", "schema", cmd+".json"))
		if err != nil {
			t.Fatalf("%s: %v", cmd, err)
		}
		schemas[cmd] = s
	}
	dir := t.TempDir()
	few := filepath.Join(dir, "few.csv")
	os.WriteFile(few, []byte("time,label\n0,+\n1,+\n2,+\n"), 0o644)
	for _, args := range [][]string{
		{"describe", "../../testdata/ring3.toml"},
		{"describe", "../../testdata/offedge.toml", "--time-unit", "ms"},
		{"describe", "../../testdata/balanced.toml"},
		{"inspect", "../../testdata/ring3-demo.csv", "--boot", "20", "--shape-resamples", "0", "--per-record"},
		{"inspect", few},
		{"inspect", "../../testdata/infer/ring3-trace.csv", "--edge", "A>B,B>A", "--boot", "0"},
		{"fluct", "../../testdata/ring3-demo.csv", "--windows", "3,100", "--bounds", "--fixed-time", "--boot", "20"},
		{"predict", "../../testdata/ring3.toml"},
		{"predict", "../../testdata/ring3-demo.csv", "../../testdata/ring3.toml", "--windows", "5", "--fixed-time"},
		{"predict", "../../testdata/shared-label.toml"},
		{"fit", "../../testdata/ring3-demo.csv", "../../testdata/ring3.toml", "--starts", "2"},
		{"compare", "../../testdata/ring3-demo.csv", "../../testdata/ring3.toml", "--chains", "2", "--starts", "2"},
		{"plan", "../../testdata/ring3.toml", "../../testdata/ring3.toml", "--events", "200", "--replicates", "2", "--kl-events", "20000", "--starts", "1", "--se", "0.1"},
	} {
		out := runOut(t, append(args, "--format", "json")...)
		inst, err := jsonschema.UnmarshalJSON(bytes.NewReader(out))
		if err != nil {
			t.Fatal(err)
		}
		if err := schemas[args[0]].Validate(inst); err != nil {
			t.Errorf("%v: %v", args, err)
		}
	}
	// The schema can fail: a number written as a string is refused.
	inst, err := jsonschema.UnmarshalJSON(bytes.NewReader(runOut(t, "describe", "../../testdata/ring3.toml", "--format", "json")))
	if err != nil {
		t.Fatal(err)
	}
	cell := inst.(map[string]any)["tables"].([]any)[0].(map[string]any)["rows"].([]any)[0].(map[string]any)["cells"].(map[string]any)["value"].(map[string]any)
	cell["value"] = "3"
	if schemas["describe"].Validate(inst) == nil {
		t.Error("a number written as a string passed the schema")
	}
}

// machineValues lists every number of a report, keyed
// table/row/column/field, as the library computed it.
func machineValues(r *output.Report) map[string]float64 {
	m := map[string]float64{}
	for _, tb := range r.Tables {
		for _, row := range tb.Rows {
			for j, c := range row.Cells {
				k := tb.Key + "/" + row.Key + "/" + tb.Columns[j].Key + "/"
				switch c.Kind {
				case output.KindNumber, output.KindCount, output.KindP, output.KindFixed:
					m[k+"value"] = c.Value
				case output.KindZero:
					m[k+"value"] = 0
				case output.KindInterval:
					m[k+"lower"], m[k+"upper"] = c.Lo, c.Hi
				}
			}
		}
	}
	return m
}

// pyReader reads a CSV and a JSON rendering with Python's csv and json
// modules (and pandas when installed) and prints every number as
// table/row/column/field and float.hex().
const pyReader = `
import csv, json, math, sys
def h(x):
    return x.hex() if isinstance(x, float) else float(x).hex()
out = {}
with open(sys.argv[1], newline="") as f:
    rows = [r for r in csv.reader(f) if r and not r[0].startswith("#")]
head = rows[0]
for r in rows[1:]:
    d = dict(zip(head, r))
    for fld in ("value", "lower", "upper"):
        if d[fld] != "" and d["kind"] != "undefined":
            out["csv " + "/".join([d["table"], d["row"], d["column"], fld])] = h(float(d[fld]))
doc = json.load(open(sys.argv[2]))
for t in doc["tables"]:
    for r in t["rows"]:
        for col, c in r["cells"].items():
            for fld in ("value", "lower", "upper"):
                if fld in c and c["kind"] != "undefined":
                    v = c[fld]
                    if v is None:
                        reason = c.get("reason", "")
                        v = math.inf if ("+inf" in reason or fld + " inf" in reason) else -math.inf
                    out["json " + "/".join([t["key"], r["key"], col, fld])] = h(float(v))
try:
    import pandas
    df = pandas.read_csv(sys.argv[1], comment="#", keep_default_na=False, dtype=str)
    for _, d in df.iterrows():
        for fld in ("value", "lower", "upper"):
            if d[fld] != "" and d["kind"] != "undefined":
                out["pandas " + "/".join([d["table"], d["row"], d["column"], fld])] = h(float(d[fld]))
    num = pandas.read_csv(sys.argv[1], comment="#")
    out["pandas numeric value column"] = str(num["value"].dtype)
except ImportError:
    pass
for k, v in sorted(out.items()):
    print(k + "\t" + v)
`

// TestPythonRoundTrip: the CSV and JSON renderings of real reports, read by
// Python's csv and json modules (and pandas.read_csv(comment="#") when
// installed), give every number bit for bit as the library computed it.
// Skipped without python3.
func TestPythonRoundTrip(t *testing.T) {
	// Prefer an interpreter with pandas (Debian's python3-pandas goes with
	// /usr/bin/python3, which need not be the python3 on PATH).
	py := ""
	for _, cand := range []string{"python3", "/usr/bin/python3"} {
		p, err := exec.LookPath(cand)
		if err != nil {
			continue
		}
		if py == "" {
			py = p
		}
		if exec.Command(p, "-c", "import pandas").Run() == nil {
			py = p
			break
		}
	}
	if py == "" {
		t.Skip("python3 not installed")
	}
	d, rep, err := infer.ReadFile("../../testdata/ring3-demo.csv", infer.ReadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	insp, err := inspectReport(d, rep, inspectConfig{plus: "+", minus: "-", level: 0.95, perRecord: true, window: 50, boot: 30, dboot: 30, shapeBoot: 0, seed: 4})
	if err != nil {
		t.Fatal(err)
	}
	_, m, net, err := loadModel("../../testdata/offedge.toml")
	if err != nil {
		t.Fatal(err)
	}
	desc := &output.Report{Command: "describe"}
	if err := describeTables(desc, m, net, "ms"); err != nil {
		t.Fatal(err)
	}
	_, m3, net3, err := loadModel("../../testdata/ring3.toml")
	if err != nil {
		t.Fatal(err)
	}
	k, err := likelihood.NewKernels(net3)
	if err != nil {
		t.Fatal(err)
	}
	pred, err := likelihood.NewPredictor(k, likelihood.Instrument{})
	if err != nil {
		t.Fatal(err)
	}
	pr := &output.Report{Command: "predict"}
	if err := predictTables(pr, m3, net3, k, pred, likelihood.Instrument{}, 0, 1, []int{5}, true, nil, ""); err != nil {
		t.Fatal(err)
	}
	if err := againstData(pr, net3, pred, d, likelihood.Instrument{}, 0, 1, []int{5}, false, 0.95, ""); err != nil {
		t.Fatal(err)
	}
	pandas := false
	for _, r := range []*output.Report{insp, desc, pr} {
		dir := t.TempDir()
		var files []string
		for _, f := range []output.Format{output.CSV, output.JSON} {
			var b bytes.Buffer
			if err := output.Render(&b, r, f, output.Options{}); err != nil {
				t.Fatal(err)
			}
			p := filepath.Join(dir, "r."+string(f))
			os.WriteFile(p, b.Bytes(), 0o644)
			files = append(files, p)
		}
		got, err := exec.Command(py, "-c", pyReader, files[0], files[1]).CombinedOutput()
		if err != nil {
			t.Fatalf("python: %v\n%s", err, got)
		}
		want := machineValues(r)
		seen := map[string]int{}
		for _, line := range strings.Split(strings.TrimSpace(string(got)), "\n") {
			key, hex, _ := strings.Cut(line, "\t")
			reader, k, _ := strings.Cut(key, " ")
			if reader == "pandas" && k == "numeric value column" {
				pandas = true
				if hex != "float64" {
					t.Errorf("pandas reads the value column as %s, not float64", hex)
				}
				continue
			}
			w, ok := want[k]
			if !ok {
				t.Errorf("%s: %s not in the report", reader, k)
				continue
			}
			g, err := strconv.ParseFloat(hex, 64)
			if err != nil {
				t.Fatalf("%s: %v", line, err)
			}
			if math.Float64bits(g) != math.Float64bits(w) && !(g == 0 && w == 0) {
				t.Errorf("%s %s: %v, library %v", reader, k, g, w)
			}
			seen[reader]++
		}
		if seen["csv"] != len(want) || seen["json"] != len(want) {
			t.Errorf("%s: csv read %d numbers, json %d, report has %d", r.Command, seen["csv"], seen["json"], len(want))
		}
	}
	if !pandas {
		t.Log("pandas not installed: checked with Python's csv and json modules only")
	}
}

// TestTerminalWidthShipped: no line of the terminal output of the shipped
// examples is wider than 100 columns.
func TestTerminalWidthShipped(t *testing.T) {
	t.Setenv("COLUMNS", "")
	var runs [][]string
	specs, _ := filepath.Glob("../../testdata/*.toml")
	for _, s := range specs {
		runs = append(runs, []string{"describe", s}, []string{"predict", s, "--windows", "5,20", "--fixed-time"})
	}
	for _, d := range []string{"../../testdata/ring3-demo.csv", "../../testdata/ring4-demo.csv"} {
		runs = append(runs,
			[]string{"inspect", d, "--boot", "20", "--shape-resamples", "0", "--per-record"},
			[]string{"fluct", d, "--windows", "5,20,100", "--fixed-time", "--bounds", "--boot", "20"})
	}
	runs = append(runs, []string{"predict", "../../testdata/ring4-demo.csv", "../../testdata/ring4.toml", "--windows", "5,20", "--fixed-time"})
	for _, args := range runs {
		out := runOut(t, args...)
		for i, l := range strings.Split(string(out), "\n") {
			if n := utf8.RuneCountInString(l); n > 100 {
				t.Errorf("%v: line %d has %d columns: %q", args, i+1, n, l)
			}
		}
	}
}

// TestBalancedSign: predict and inspect agree on the visible edge's
// direction for balanced.toml (labels out and in: the spec's direction 0,
// Bound1 -> Empty, is out), and on the sign of F and J for a driven copy
// of it, from the model (predict), the records (inspect, direction from
// the stamp simulate wrote) and the records against the model (predict).
func TestBalancedSign(t *testing.T) {
	src, err := os.ReadFile("../../testdata/balanced.toml")
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	driven := filepath.Join(dir, "driven.toml")
	os.WriteFile(driven, bytes.Replace(src, []byte("value = 0.0\nsolve"), []byte("value = -3.0\nsolve"), 1), 0o644)
	recs := filepath.Join(dir, "driven.csv")
	runOut(t, "simulate", driven, "-n", "20000", "--seed", "3", "-o", recs)
	for _, spec := range []string{"../../testdata/balanced.toml", driven} {
		p := runJSON(t, "predict", spec, "--windows", "5")
		if lab := p.table(t, "predicted").Rows; !strings.Contains(strings.Join(p.Notes, " "), "forward out, backward in") {
			t.Errorf("%s: predict does not take out as forward: %v %v", spec, p.Notes, lab[0])
		}
	}
	p := runJSON(t, "predict", recs, driven, "--windows", "5")
	in := runJSON(t, "inspect", recs, "--boot", "0", "--shape-resamples", "0")
	Fm, Jm := p.num(t, "predicted", "F", "value"), p.num(t, "predicted", "J", "value")
	Fd, Jd := in.num(t, "edge", "F", "value"), in.num(t, "edge", "J", "value")
	Fpd := p.num(t, "against", "F", "data")
	if !(math.Abs(Fm) > 0.5) || math.Signbit(Fm) != math.Signbit(Fd) || math.Signbit(Fm) != math.Signbit(Fpd) || math.Signbit(Jm) != math.Signbit(Jd) || math.Signbit(Fm) != math.Signbit(Jm) {
		t.Errorf("signs differ: model F %g J %g, inspect F %g J %g, predict's data F %g", Fm, Jm, Fd, Jd, Fpd)
	}
	if !strings.Contains(strings.Join(in.Notes, " "), "forward out, backward in") {
		t.Errorf("inspect does not say out is forward: %v", in.Notes)
	}
	// Two labels without a stamp: first appearance is forward, and said.
	plain := filepath.Join(dir, "plain.csv")
	os.WriteFile(plain, []byte("time,label\n0,in\n1,out\n2,in\n3,in\n4,out\n"), 0o644)
	r := runJSON(t, "inspect", plain, "--boot", "0", "--shape-resamples", "0")
	if !strings.Contains(strings.Join(r.Notes, " "), "forward in (the first label in the records)") {
		t.Errorf("first-appearance rule not said: %v", r.Notes)
	}
}

// TestWriteFailureCommands: a failing output (every byte position of
// describe's output on a failing standard output, /dev/full for every
// command and format) gives exit code 1 and a message, never 0.
func TestWriteFailureCommands(t *testing.T) {
	for _, f := range allFormats {
		full := runOut(t, "describe", "../../testdata/ring3.toml", "--format", f)
		for n := 0; n < len(full); n += 1 + n/64 {
			var errb bytes.Buffer
			if code := run([]string{"describe", "../../testdata/ring3.toml", "--format", f}, &failWriter{n: n}, &errb); code != 1 || !strings.Contains(errb.String(), "edgewise describe: writing standard output") {
				t.Fatalf("%s: failure at byte %d: code %d: %s", f, n, code, errb.String())
			}
		}
	}
	if _, err := os.Stat("/dev/full"); err != nil {
		t.Log("no /dev/full: device part skipped")
		return
	}
	for _, c := range goldenCases {
		for _, f := range allFormats {
			var out, errb bytes.Buffer
			if code := run(append(c.args, "--format", f, "-o", "/dev/full"), &out, &errb); code != 1 || !strings.Contains(errb.String(), "/dev/full") {
				t.Errorf("%s %s: code %d: %s", c.name, f, code, errb.String())
			}
		}
	}
	var out, errb bytes.Buffer
	if code := run([]string{"simulate", "../../testdata/ring3.toml", "-n", "100", "-o", "/dev/full"}, &out, &errb); code != 1 {
		t.Errorf("simulate to /dev/full: code %d", code)
	}
	if code := run([]string{"describe", "../../testdata/ring3.toml", "-o", "/dev/null"}, &out, &errb); code != 0 {
		t.Errorf("describe to /dev/null without --force: code %d: %s", code, errb.String())
	}
}

// failWriter fails once n bytes were written.
type failWriter struct{ n, done int }

func (f *failWriter) Write(p []byte) (int, error) {
	if f.done+len(p) > f.n {
		k := f.n - f.done
		f.done = f.n
		return k, fmt.Errorf("no space left on device")
	}
	f.done += len(p)
	return len(p), nil
}
