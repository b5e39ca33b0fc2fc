package likelihood

// Record is one uninterrupted observation: visible events in time order.
//
// Times are in the same unit as the model's rates (rate = 1/time). Labels are
// small integers that index a label-name table (Data.Labels); they are stored
// as bytes so that 10^7 events take 90 MB, not 240 MB.
type Record struct {
	ID    string    // record name from the file ("" when the file has one record)
	Time  []float64 // event times, non-decreasing
	Label []uint8   // Label[k] indexes Data.Labels
	// End is the time the observation stopped, when the file says so, and
	// NaN when it is unknown (the record then ends at its last event). A
	// known end adds the censored final interval: no event in (Time[n-1], End].
	End float64
}

// Len returns the number of events in r.
func (r *Record) Len() int { return len(r.Time) }

// Data is a data set: one or more records sharing one label table.
type Data struct {
	Labels  []string // label names, e.g. ["+", "-"]
	Records []Record
}

// Events returns the total number of events over all records.
func (d *Data) Events() int {
	n := 0
	for i := range d.Records {
		n += len(d.Records[i].Time)
	}
	return n
}
