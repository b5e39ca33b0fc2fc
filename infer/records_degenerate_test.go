package infer

import (
	"errors"
	"math"
	"strings"
	"testing"

	"edgewise/likelihood"
)

// TestReadDegenerateTimes: times outside the working range, gaps that
// underflow and times beyond double precision are refused with the file,
// line and column of the offending time; each case is one that gave an
// infinite rate, an infinite observed time, a panic or an unnamed
// "density 0" before.
func TestReadDegenerateTimes(t *testing.T) {
	cases := []struct {
		name, text, want string
	}{
		{"span overflows", "time,label\n-1e308,+\n1e308,-\n", "x.csv:2:1: time: \"-1e308\" is beyond 1e+150"},
		{"span near the float64 range", "time,label\n0,+\n1.7e308,-\n", "x.csv:3:1: time: \"1.7e308\" is beyond"},
		{"subnormal time", "time,label\n0,+\n4.9e-324,-\n1e-320,+\n", "x.csv:3:1: time: \"4.9e-324\" is subnormal"},
		{"gap underflows", "time,label\n1e-200,+\n2e-200,-\n", "x.csv:3:1: time: \"2e-200\": the gap 1e-200 to the previous time (line 2) is below 1e-150"},
		{"beyond double precision", "time,label\n100000000000000000000,+\n100000000000000000001,-\n", "x.csv:3:1: time: \"100000000000000000001\" and \"100000000000000000000\" (line 2) are different numbers but the same float64"},
		{"end at the last event's time", "time,label\n1,+\n1.0000000000000002,-\n1.0000000000000002,end\n", ""},
	}
	for _, c := range cases {
		_, _, err := ReadRecords(strings.NewReader(c.text), "x.csv", ReadOptions{})
		switch {
		case c.want == "" && err != nil:
			t.Errorf("%s: %v", c.name, err)
		case c.want != "" && (err == nil || !strings.Contains(err.Error(), c.want)):
			t.Errorf("%s: error %v, want %q", c.name, err, c.want)
		}
	}
	// Equal numbers in other spellings are duplicates, not an error.
	d, rep, err := ReadRecords(strings.NewReader("time,label\n1.5,+\n1.50,-\n15e-1,+\n0.15E1,-\n+1.5,+\n3,-\n"), "x.csv", ReadOptions{})
	if err != nil || rep.Duplicates() != 4 || d.Events() != 6 {
		t.Fatalf("spellings of 1.5: %v, %d duplicates", err, rep.Duplicates())
	}
}

// TestSameDecimal: equality of decimal values against their spellings.
func TestSameDecimal(t *testing.T) {
	same := [][2]string{{"1.5", "1.50"}, {"1.5", "15e-1"}, {"0.001", "1e-3"}, {"-0", "0.000"}, {"100", "1e2"}, {"0.0100", "1.0E-2"}, {"+7", "7."}, {"00012.3400", "1.234e1"}}
	differ := [][2]string{{"1.5", "-1.5"}, {"100000000000000000000", "100000000000000000001"}, {"1e2", "1e3"}, {"0.1", "0.01"}, {"12", "21"}, {"0", "1e-400"}}
	for _, c := range same {
		if !sameDecimal([]byte(c[0]), []byte(c[1])) {
			t.Errorf("%s and %s: different", c[0], c[1])
		}
	}
	for _, c := range differ {
		if sameDecimal([]byte(c[0]), []byte(c[1])) {
			t.Errorf("%s and %s: same", c[0], c[1])
		}
	}
}

// TestCheckTimes: the statistics refuse hand-built data outside the
// working range by record and event instead of panicking or returning
// infinite numbers.
func TestCheckTimes(t *testing.T) {
	mk := func(times ...float64) *likelihood.Data {
		return &likelihood.Data{Labels: []string{"+", "-"}, Records: []likelihood.Record{{ID: "r", Time: times, Label: make([]uint8, len(times)), End: math.NaN()}}}
	}
	for _, c := range []struct {
		d    *likelihood.Data
		want string
	}{
		{mk(-1e308, 1e308), `record "r" event 1: time -1e+308 is beyond`},
		{mk(0, 5e-324, 1e-320), `record "r" event 2: time 5e-324 is subnormal`},
		{mk(1, 1, 2, math.NaN()), `record "r" event 4: time NaN is not finite`},
		{mk(1e-200, 2e-200), `record "r" event 2: gap 1e-200`},
		{mk(2, 1), `before the previous event`},
	} {
		if err := CheckTimes(c.d); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%v: %v, want %q", c.d.Records[0].Time, err, c.want)
		}
		plus, minus := uint8(0), uint8(1)
		c.d.Records[0].Label[0] = 1
		if _, err := Summarize(c.d, SummaryOptions{}); err == nil {
			t.Errorf("%v: summary accepted", c.d.Records[0].Time)
		}
		if _, err := EntropyBounds(c.d, BoundOptions{}); err == nil {
			t.Errorf("%v: bounds accepted", c.d.Records[0].Time)
		}
		if _, err := FluctuationTest(c.d, []int{2}, FluctOptions{}); err == nil {
			t.Errorf("%v: fluctuation test accepted", c.d.Records[0].Time)
		}
		if _, err := ShapeTest(c.d, plus, minus); err == nil {
			t.Errorf("%v: shape test accepted", c.d.Records[0].Time)
		}
	}
	if err := CheckTimes(mk(0, 1, 1, 2)); err != nil {
		t.Errorf("zero gap refused: %v", err)
	}
}

// TestZeroGapLocated: the reader notes where each record's first zero gap
// is, and Locate turns the likelihood's refusal of it into file:line.
func TestZeroGapLocated(t *testing.T) {
	text := "record,time,label\n# c\na,0,+\na,1,-\nb,0.5,-\nb,2,+\n\nb,2,+\nb,2,-\nb,3,+\n"
	_, rep, err := ReadRecords(strings.NewReader(text), "z.csv", ReadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	b := rep.Records[1]
	if b.Duplicates != 2 || b.ZeroGapLine != 8 || b.ZeroGapEvent != 3 {
		t.Fatalf("record b: %+v", b)
	}
	if got := rep.ZeroGaps(); !strings.Contains(got, "2 zero gaps") || !strings.Contains(got, "z.csv:8 (record \"b\", event 3)") {
		t.Errorf("ZeroGaps() = %q", got)
	}
	err = rep.Locate(&likelihood.ZeroGapError{ID: "b", Event: 3, Time: 2})
	var re *ReadError
	if !errors.As(err, &re) || re.Line != 8 || re.File != "z.csv" {
		t.Errorf("Locate: %v", err)
	}
	other := errors.New("other")
	if rep.Locate(other) != other {
		t.Error("Locate changed an unrelated error")
	}
}

// TestReadLimits: UTF-16 text, overlong labels, states, record IDs and
// lines are refused with the limit said, and no message repeats more than
// 40 bytes of the input.
func TestReadLimits(t *testing.T) {
	utf16 := func(s string) string {
		b := []byte{0xff, 0xfe}
		for _, c := range []byte(s) {
			b = append(b, c, 0)
		}
		return string(b)
	}
	long := strings.Repeat("x", 50000)
	cases := []struct{ name, text, want string }{
		{"UTF-16 LE", utf16("time,label\n1,+\n"), "x.csv:1: UTF-16 text"},
		{"UTF-16 without BOM", utf16("time,label\n1,+\n")[2:], "x.csv:1: UTF-16 text"},
		{"long label", "time,label\n1," + long + "\n", "x.csv:2:3: label: \"xxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxx\"... (50000 bytes) is longer than 100 bytes"},
		{"long state", "time,state\n1," + long + "\n", "is longer than 100 bytes, the limit of a state name"},
		{"long record ID", "record,time,label\n" + long + ",1,+\n", "is longer than 256 bytes"},
		{"long line", "time,label\n1,+\n#" + strings.Repeat("y", 2<<20) + "\n", "x.csv:3: line longer than 1048576 bytes"},
		{"long time", "time,label\n1" + long + ",+\n", "time: \"1xxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxx\"... (50001 bytes) is not a number"},
		{"long unknown label", "time,label\n1,+\n2," + strings.Repeat("é", 50) + "\n", "(100 bytes)"},
	}
	for _, c := range cases {
		opt := ReadOptions{}
		if c.name == "long unknown label" {
			opt.Known = []string{"+", "-"}
		}
		_, _, err := ReadRecords(strings.NewReader(c.text), "x.csv", opt)
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: %v, want %q", c.name, err, c.want)
			continue
		}
		if len(err.Error()) > 400 {
			t.Errorf("%s: message of %d bytes", c.name, len(err.Error()))
		}
	}
}
