package infer

import (
	"bytes"
	"errors"
	"math"
	"math/big"
	"math/rand/v2"
	"strconv"
	"strings"
	"testing"

	"edgewise/likelihood"
)

// TestReadSimulatorOutput: the shipped demo file was written by
// `edgewise simulate testdata/ring3.toml --events 5000 --records 4 --seed 1`;
// reading it must give exactly (bit for bit: the simulator writes 17
// significant digits) the events the simulator draws with that seed.
func TestReadSimulatorOutput(t *testing.T) {
	d, rep, err := ReadFile("../testdata/ring3-demo.csv", ReadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	want := recSimulate(t, recModel(t, "../testdata/ring3.toml"), 1, 4, 5000)
	if diff := recEqualData(d, want); diff != "" {
		t.Fatal(diff)
	}
	if rep.Comments != 1 || !strings.Contains(rep.Stamp, "seed 1") || len(rep.Records) != 4 || rep.Delimiter != ',' {
		t.Fatalf("report %+v", rep)
	}
	if rep.Records[1].FirstLine != 5003 || rep.Records[1].LastLine != 10002 {
		t.Fatalf("record 2 lines %d-%d, want 5003-10002", rep.Records[1].FirstLine, rep.Records[1].LastLine)
	}
	// Write and read back: same data.
	var buf bytes.Buffer
	if err := WriteRecords(&buf, d); err != nil {
		t.Fatal(err)
	}
	back, _, err := ReadRecords(&buf, "back.csv", ReadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if diff := recEqualData(d, back); diff != "" {
		t.Fatal(diff)
	}
}

func TestReadFormats(t *testing.T) {
	nan := math.NaN()
	cases := []struct {
		name, file, src string
		opt             ReadOptions
		want            likelihood.Data
		dups            int
	}{
		{"tsv by header, column order", "x.txt", "label\ttime\n+\t1\n-\t2.5\n", ReadOptions{},
			likelihood.Data{Labels: []string{"+", "-"}, Records: []likelihood.Record{{Time: []float64{1, 2.5}, Label: []uint8{0, 1}, End: nan}}}, 0},
		{"tsv by extension, single column header", "x.tsv", "# c\n\nTime\t Label \n 1 \t+\n", ReadOptions{},
			likelihood.Data{Labels: []string{"+"}, Records: []likelihood.Record{{Time: []float64{1}, Label: []uint8{0}, End: nan}}}, 0},
		{"renaming, known order, end row, quotes, CRLF, extra column", "x.csv",
			"\ufeffrecord,time,label,note\r\n\"a,1\",0,fwd,x\r\n\"a,1\",0,bwd,\"y \"\"q\"\"\"\r\n\"a,1\",3,end,\r\nb,1,fwd,\n", ReadOptions{Labels: map[string]string{"fwd": "+", "bwd": "-"}, Known: []string{"-", "+"}},
			likelihood.Data{Labels: []string{"-", "+"}, Records: []likelihood.Record{
				{ID: "a,1", Time: []float64{0, 0}, Label: []uint8{1, 0}, End: 3},
				{ID: "b", Time: []float64{1}, Label: []uint8{1}, End: nan}}}, 1},
		{"state trace", "t.csv", "time,state\n0,A\n1,A\n2,B\n3,B\n4,A\n5,A\n", ReadOptions{Labels: map[string]string{"A>B": "+"}},
			likelihood.Data{Labels: []string{"+", "B>A"}, Records: []likelihood.Record{{Time: []float64{2, 4}, Label: []uint8{0, 1}, End: 5}}}, 0},
	}
	for _, c := range cases {
		d, rep, err := ReadRecords(strings.NewReader(c.src), c.file, c.opt)
		if err != nil {
			t.Errorf("%s: %v", c.name, err)
			continue
		}
		if diff := recEqualData(d, &c.want); diff != "" {
			t.Errorf("%s: %s", c.name, diff)
		}
		if rep.Duplicates() != c.dups {
			t.Errorf("%s: %d duplicates, want %d", c.name, rep.Duplicates(), c.dups)
		}
	}
}

// TestReadErrors: every bad case gives a *ReadError naming file, line and
// column (column 0 when the problem is a whole line or header).
func TestReadErrors(t *testing.T) {
	cases := []struct {
		name, src string
		opt       ReadOptions
		line, col int
		msg       string
	}{
		{"no header", "# only a comment\n", ReadOptions{}, 0, 0, "no header"},
		{"underflow", "time,label\n1e-400,+\n", ReadOptions{}, 2, 1, "underflows to 0"},
		{"control character in label", "time,label\n1,a\x00b\n", ReadOptions{}, 2, 4, "control character"},
		{"carriage returns only", "time,label\r1,+\r2,-\r", ReadOptions{}, 1, 0, "carriage return only"},
		{"underscore number", "time,label\n1_000,+\n", ReadOptions{}, 2, 1, "not a number in decimal notation"},
		{"hex float", "time,label\n0x1p-2,+\n", ReadOptions{}, 2, 1, "not a number in decimal notation"},
		{"empty record name", "record,time,label\nA,1,+\n,2,-\nB,3,+\n", ReadOptions{}, 3, 1, "empty record name"},
		{"missing time", "label,record\n+,1\n", ReadOptions{}, 1, 0, `missing column "time"`},
		{"missing label", "# s\ntime,record\n1,1\n", ReadOptions{}, 2, 0, `missing column "label"`},
		{"missing state", "time,label\n1,+\n", ReadOptions{Trace: true}, 1, 0, `missing column "state"`},
		{"repeated column", "time,label,Time\n", ReadOptions{}, 1, 12, "repeats"},
		{"no rows", "time,label\n", ReadOptions{}, 1, 0, "no records"},
		{"not a number", "time,label\n1,+\nabc,+\n", ReadOptions{}, 3, 1, "not a number"},
		{"NaN", "label,time\n+,1\n-,NaN\n", ReadOptions{}, 3, 3, "not a finite"},
		{"infinite", "label, time\n+, 1\n-, -Inf\n", ReadOptions{}, 3, 4, "not a finite"},
		{"out of range", "time,label\n1e999,+\n", ReadOptions{}, 2, 1, "out of range"},
		{"empty time", "time,label\n,+\n", ReadOptions{}, 2, 1, "empty"},
		{"empty label", "time,label\n1,\n", ReadOptions{}, 2, 3, "empty"},
		{"backwards", "time,label\n1,+\n2,-\n1.5,+\n", ReadOptions{}, 4, 1, "earlier than the previous time 2 (line 3)"},
		{"backwards end", "time,label\n1,+\n2,-\n1.5,end\n", ReadOptions{}, 4, 1, "earlier"},
		{"unknown label", "time,label\n1,+\n2,x\n", ReadOptions{Known: []string{"+", "-"}}, 3, 3, `unknown label "x"`},
		{"unknown after renaming", "time,label\n1,fwd\n2,back\n", ReadOptions{Labels: map[string]string{"fwd": "+"}, Known: []string{"+"}}, 3, 3, `unknown label "back"`},
		{"too few fields", "time,label\n1\n", ReadOptions{}, 2, 2, "row has 1 fields, header has 2"},
		{"too many fields", "time,label\n1,+,x\n", ReadOptions{}, 2, 5, "row has 3 fields"},
		{"reappearing record", "record,time,label\n1,0,+\n2,0,+\n1,1,+\n", ReadOptions{}, 4, 1, `record "1" reappears after other records (its rows ended on line 2)`},
		{"empty record", "record,time,label\n1,0,+\n2,5,end\n", ReadOptions{}, 3, 5, "end row before any event"},
		{"row after end", "record,time,label\n1,0,+\n1,2,end\n1,3,+\n", ReadOptions{}, 4, 0, "after the end of record"},
		{"row after end, no record column", "time,label\n0,+\n2,end\n3,+\n", ReadOptions{}, 4, 0, "after the end"},
		{"empty trace", "time,state\n0,A\n1,A\n", ReadOptions{}, 2, 0, "no change of state in 2 samples"},
		{"empty state", "time,state\n0,A\n1,\n", ReadOptions{}, 3, 3, "empty"},
		{"open quote", "time,label\n1,\"+\n", ReadOptions{}, 2, 3, "not closed"},
		{"stray quote", "time,label\n1,a\"b\n", ReadOptions{}, 2, 4, "quote inside"},
		{"text after quote", "time,label\n1,\"a\"b\n", ReadOptions{}, 2, 6, "after a quoted field"},
		{"reserved known", "time,label\n1,+\n", ReadOptions{Known: []string{"end"}}, 0, 0, "reserved"},
		{"renamed to end", "time,label\n1,x\n", ReadOptions{Labels: map[string]string{"x": "end"}}, 2, 3, "reserved"},
	}
	for _, c := range cases {
		_, _, err := ReadRecords(strings.NewReader(c.src), "bad.csv", c.opt)
		if err == nil {
			t.Errorf("%s: no error", c.name)
			continue
		}
		if !strings.HasPrefix(err.Error(), "bad.csv") || !strings.Contains(err.Error(), c.msg) {
			t.Errorf("%s: error %q, want file name and %q", c.name, err, c.msg)
		}
		var re *ReadError
		if !errors.As(err, &re) {
			if c.line != 0 {
				t.Errorf("%s: %T is not a *ReadError", c.name, err)
			}
			continue
		}
		if re.Line != c.line || re.Column != c.col {
			t.Errorf("%s: at %d:%d, want %d:%d (%v)", c.name, re.Line, re.Column, c.line, c.col, err)
		}
	}
}

// TestParseDecimal: the fast path agrees bit for bit with strconv.ParseFloat
// (the reference) on random plain decimals of up to 21 digits, on exact
// halfway cases between two float64s (round half to even; built with
// math/big), and on edge cases, and declines what it cannot do exactly.
func TestParseDecimal(t *testing.T) {
	cases := []string{"0", "-0", "+0.0", "1.", ".5", "00.50", "0.000123", "123456789012345", "1234567890123456",
		"9007199254740993", "9007199254740993.0", "18446744073709551615", "9999999999999999999", "10000000000000000000",
		"1e22", "1e23", "1e-22", "1.5e-23", "-2.5E+3", "1e", "1e+", ".", "-", "1.2.3", "0x1p3", "1_0", "0e999", "12e-5",
		"4503599627370496.5", "4503599627370497.5", "0.1000000000000000055511151231257827", "14000.699999999999",
		"1.2345678901234567e+06", "9.999999999999999999e-8"}
	rng := rand.New(rand.NewPCG(8, 9))
	for i := 0; i < 300000; i++ {
		var b []byte
		if rng.IntN(4) == 0 {
			b = append(b, '-')
		}
		nd := 1 + rng.IntN(21)
		dot := rng.IntN(nd + 1)
		for j := 0; j < nd; j++ {
			if j == dot {
				b = append(b, '.')
			}
			b = append(b, byte('0'+rng.IntN(10)))
		}
		if rng.IntN(3) == 0 {
			b = strconv.AppendInt(append(b, 'e'), int64(rng.IntN(70)-35), 10)
		}
		cases = append(cases, string(b))
	}
	// Halfway cases: (2M+1) 2^-(j+1) with M a 53-bit integer lies midway
	// between the float64s M 2^-j and (M+1) 2^-j; written in full it has j+1
	// decimals and 17-19 significant digits for j <= 2.
	for i := 0; i < 20000; i++ {
		M := uint64(1)<<52 + rng.Uint64N(1<<52)
		j := rng.IntN(3)
		x := new(big.Float).SetPrec(200).SetUint64(2*M + 1)
		x.SetMantExp(x, -(j + 1))
		cases = append(cases, x.Text('f', j+1))
	}
	fast, long := 0, 0
	for _, c := range cases {
		got, ok := parseDecimal([]byte(c))
		want, err := strconv.ParseFloat(c, 64)
		if !ok {
			continue
		}
		fast++
		if strings.TrimLeft(strings.Trim(strings.ReplaceAll(c, ".", ""), "-"), "0") != "" && len(c) > 17 {
			long++
		}
		if err != nil || math.Float64bits(got) != math.Float64bits(want) {
			t.Fatalf("%q: fast %v (%#x), strconv %v (%#x) (%v)", c, got, math.Float64bits(got), want, math.Float64bits(want), err)
		}
	}
	if fast < len(cases)/2 || long < 10000 {
		t.Errorf("fast path took only %d of %d (%d long)", fast, len(cases), long)
	}
}

// FuzzReadRecords: whatever the reader accepts is valid data (finite,
// non-decreasing times, label indices in range, non-empty records, End not
// before the last event), and writing it then reading it back gives the
// same data.
func FuzzReadRecords(f *testing.F) {
	seeds := []string{
		"record,time,label\n1,0.5,+\n1,0.7,-\n2,0.1,+\n",
		"time\tlabel\n1\t+\n1\t+\n2\tend\n",
		"# stamp\nlabel,time,record\n\"a\"\"b\",1e-3,\"r,1\"\n-,2,\"r,1\"\n",
		"time,state\n0,A\n1,B\n2,C\n3,A\n",
		"time,label,extra\n-0,x,1\n0x1p-2,y,2\n",
		"time,label\n1,+\n2,end\n3,+\n",
	}
	for _, s := range seeds {
		f.Add(s, false)
	}
	f.Add("time,state,label\n0,A,x\n1,B,y\n", true)
	f.Fuzz(func(t *testing.T, src string, trace bool) {
		d, _, err := ReadRecords(strings.NewReader(src), "fuzz.csv", ReadOptions{Trace: trace})
		if err != nil {
			var re *ReadError
			if !errors.As(err, &re) && !strings.HasPrefix(err.Error(), "fuzz.csv") {
				t.Fatalf("error without location: %v", err)
			}
			return
		}
		if len(d.Records) == 0 {
			t.Fatal("accepted with no records")
		}
		for _, r := range d.Records {
			if r.Len() == 0 || len(r.Label) != r.Len() {
				t.Fatalf("record %q: %d times, %d labels", r.ID, r.Len(), len(r.Label))
			}
			for k, x := range r.Time {
				if math.IsNaN(x) || math.IsInf(x, 0) || (k > 0 && x < r.Time[k-1]) {
					t.Fatalf("record %q: bad time %v at %d", r.ID, x, k)
				}
				if int(r.Label[k]) >= len(d.Labels) {
					t.Fatalf("label index %d out of range", r.Label[k])
				}
			}
			if !math.IsNaN(r.End) && r.End < r.Time[r.Len()-1] {
				t.Fatalf("end %v before last event", r.End)
			}
		}
		var buf bytes.Buffer
		if err := WriteRecords(&buf, d); err != nil {
			// Only an empty record ID among several records cannot be written.
			if !strings.Contains(err.Error(), "empty ID") {
				t.Fatal(err)
			}
			return
		}
		back, _, err := ReadRecords(&buf, "back.csv", ReadOptions{Known: d.Labels})
		if err != nil {
			t.Fatalf("re-read: %v\n%s", err, buf.String())
		}
		if diff := recEqualData(d, back); diff != "" {
			t.Fatalf("round trip: %s\n%s", diff, buf.String())
		}
	})
}
