package infer_test

import (
	"fmt"
	"strings"

	"edgewise/infer"
)

// Reading records with renamed labels and estimating the effective
// affinity of the visible edge. By hand: pairs ++ = 3 of N+. = 5 and
// -- = 1 of N-. = 3, so F = ln[(3/5)/(1/3)] = ln 1.8 = 0.588, and
// Var F = 1/3 - 1/5 + 1/1 - 1/3 = 0.8.
func ExampleReadRecords() {
	src := `# two short records; "end" marks where observation stopped
record,time,label
a,0.0,fwd
a,0.4,fwd
a,1.1,bwd
a,1.3,bwd
a,1.5,fwd
a,2.0,fwd
a,2.6,end
b,0.2,fwd
b,0.9,fwd
b,1.0,bwd
b,1.8,fwd
`
	d, rep, err := infer.ReadRecords(strings.NewReader(src), "demo.csv",
		infer.ReadOptions{Labels: map[string]string{"fwd": "+", "bwd": "-"}})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println("labels:", d.Labels, "records:", len(d.Records), "events:", d.Events())
	fmt.Println("record a ends at", d.Records[0].End, "(line", rep.Records[0].LastLine, "of the file)")
	n := infer.TransitionCounts(d)
	fmt.Println("pairs ++ +- -+ --:", n[0][0], n[0][1], n[1][0], n[1][1])
	f := infer.EffectiveAffinity(d, 0, 1)
	fmt.Printf("F = %.3f +- %.3f (%s)\n", f.Value, f.SE, f.Method)
	// Output:
	// labels: [+ -] records: 2 events: 10
	// record a ends at 2.6 (line 9 of the file)
	// pairs ++ +- -+ --: 3 2 2 1
	// F = 0.588 +- 0.894 (delta method)
}

// A file error names the file, line and column.
func ExampleReadError() {
	src := "time,label\n0.5,+\n0.2,-\n"
	_, _, err := infer.ReadRecords(strings.NewReader(src), "run7.csv", infer.ReadOptions{})
	fmt.Println(err)
	// Output:
	// run7.csv:3:1: time: 0.2 is earlier than the previous time 0.5 (line 2) in record "": times must not decrease within a record
}
