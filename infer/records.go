package infer

import (
	"errors"
	"fmt"
	"io"
	"os"
	"strings"

	"edgewise/likelihood"
)

// EndLabel is the reserved label of a row that marks where a record's
// observation stopped: its time becomes Record.End. It must be the last row
// of its record and not earlier than the record's last event.
const EndLabel = "end"

// ReadOptions control how ReadRecords interprets a file.
type ReadOptions struct {
	// Labels renames file labels to model labels, e.g. {"fwd": "+",
	// "bwd": "-"}. A file label that is not a key is kept as written.
	// In a state trace the keys are the change names "X>Y".
	Labels map[string]string
	// Known, when not empty, is the full label set after renaming, in the
	// order wanted for Data.Labels; any other label is an error. When empty,
	// labels are numbered in order of first appearance.
	Known []string
	// Trace reads the file as a state trace (columns time and state): each
	// change of the observed state from X to Y becomes an event labelled
	// "X>Y" (renamed through Labels) at the time of the first sample showing
	// Y. A file whose header has a state column and no label column is read
	// as a trace even when Trace is false.
	Trace bool
	// Delimiter is ',' or '\t'; zero detects it from the header line (tab
	// when the header has a tab and no comma), and from the extension
	// (.tsv, .tab) when the header has neither.
	Delimiter rune
	// SizeHint is the input size in bytes when known, used only to size
	// the event slices once; ReadRecords finds it itself when the reader
	// is a regular file.
	SizeHint int64
}

// ReadError is one problem in a records file, located by file, line and
// column (both 1-based; 0 when unknown). Column counts bytes from the start
// of the line to the start of the offending field.
type ReadError struct {
	File   string
	Line   int
	Column int
	Field  string // column name, e.g. "time"; "" when not about one field
	Msg    string
}

func (e *ReadError) Error() string {
	var b strings.Builder
	b.WriteString(e.File)
	if e.Line > 0 {
		fmt.Fprintf(&b, ":%d", e.Line)
		if e.Column > 0 {
			fmt.Fprintf(&b, ":%d", e.Column)
		}
	}
	b.WriteString(": ")
	if e.Field != "" {
		b.WriteString(e.Field)
		b.WriteString(": ")
	}
	b.WriteString(e.Msg)
	return b.String()
}

// ReadReport describes what ReadRecords read.
type ReadReport struct {
	File      string
	Delimiter rune
	Columns   []string // header names as written
	Ignored   []string // header columns the reader did not use
	Trace     bool     // read as a state trace
	Lines     int      // lines read, comments and blank lines included
	Comments  int      // '#' lines
	Stamp     string   // text of the first '#' line, without the '#'
	Records   []RecordReport
}

// RecordReport describes one record as read.
type RecordReport struct {
	ID                  string
	FirstLine, LastLine int // lines of the record's first and last rows
	Rows                int // data rows (samples for a trace)
	Events              int
	// Duplicates counts events whose time equals the previous event's
	// time. Exact likelihoods give such a zero gap a density that is
	// usually zero or meaningless, so a nonzero count needs attention
	// (timestamps rounded to a clock tick, or doubled rows).
	Duplicates int
	// ZeroGapLine is the line of the record's first event with the time
	// of the previous event (0 when there is none) and ZeroGapEvent its
	// 1-based index among the record's events.
	ZeroGapLine, ZeroGapEvent int
	End                       bool // the record's end time is known (an end row, or a trace)
}

// Duplicates returns the number of zero gaps over all records.
func (r *ReadReport) Duplicates() int {
	n := 0
	for _, rr := range r.Records {
		n += rr.Duplicates
	}
	return n
}

// ZeroGaps describes the zero gaps of the file for a note: their number and
// where the first is ("" when there is none). Zero gaps are kept in every
// count (P(l'|l), F, J, the windows of the fluctuation test), left out of
// the waiting-time divergences and flagged as ties by the shape test; an
// exact-time likelihood refuses them (see likelihood.ZeroGapError).
func (r *ReadReport) ZeroGaps() string {
	n := r.Duplicates()
	if n == 0 {
		return ""
	}
	for _, rr := range r.Records {
		if rr.ZeroGapLine > 0 {
			return fmt.Sprintf("%d zero gaps (an event with the time of the previous one: the gap is below the times' resolution), the first at %s:%d (record %q, event %d)", n, r.File, rr.ZeroGapLine, rr.ID, rr.ZeroGapEvent)
		}
	}
	return fmt.Sprintf("%d zero gaps", n)
}

// Locate turns an error of the likelihood about one event into a ReadError
// at that event's line, when the report knows the line (a zero gap: the
// first of its record); any other error is returned unchanged.
func (r *ReadReport) Locate(err error) error {
	var imp *ImpossibleError
	if r != nil && errors.As(err, &imp) {
		for _, rr := range r.Records {
			// Rows of a record are contiguous; without comment or blank
			// lines inside it, event k sits on line FirstLine + k - 1.
			if rr.ID == imp.Record && rr.Rows == rr.Events && rr.LastLine-rr.FirstLine+1 == rr.Rows && imp.Event <= rr.Events {
				return &ReadError{File: r.File, Line: rr.FirstLine + imp.Event - 1, Field: "label", Msg: imp.Error()}
			}
		}
		return err
	}
	var zg *likelihood.ZeroGapError
	if r == nil || !errors.As(err, &zg) {
		return err
	}
	for _, rr := range r.Records {
		if rr.ID == zg.ID && rr.ZeroGapEvent == zg.Event {
			return &ReadError{File: r.File, Line: rr.ZeroGapLine, Field: "time", Msg: fmt.Sprintf("zero gap in record %q (time %v, the same as the previous event): with exact timestamps the likelihood cannot use it; the gaps are finer than the times' resolution, so give that resolution as the frame length (--frame)", zg.ID, zg.Time)}
		}
	}
	return err
}

// ReadFile opens path and reads it with ReadRecords.
func ReadFile(path string, opt ReadOptions) (*likelihood.Data, *ReadReport, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, nil, err
	}
	defer f.Close()
	return ReadRecords(f, path, opt)
}

// ReadRecords reads records of visible events from CSV or TSV text.
//
// Format: '#' lines (after optional spaces) are comments and blank lines are
// skipped anywhere. The first other line is the header; it names the columns
// in any order, case-insensitively: time (required), label (required unless
// the file is a state trace), record (optional), state (state traces only).
// Other columns are ignored and listed in the report. Fields may be quoted
// with '"' ("" inside quotes is one quote) but may not span lines; spaces
// around fields are dropped.
//
// Conventions:
//   - A file without a record column is one record with ID "".
//   - Rows of one record must be contiguous: a record ID that reappears after
//     another record's rows is an error.
//   - Times are finite numbers (strconv.ParseFloat syntax), non-decreasing
//     within a record. Equal times are accepted and counted as duplicates.
//   - A row whose label is "end" (EndLabel) gives the record's end time
//     (Record.End); it must be the record's last row. Without one End is NaN.
//   - Every record must have at least one event.
//   - A state trace turns each change of state into an event, and End is the
//     time of the record's last sample (the state is known not to change
//     between the last event and the last sample). Timestamps of a sampled
//     trace are known only to the sampling interval (see
//     likelihood.Instrument.Frame).
//
// file names the source in errors. Memory: 9 bytes per event plus slice
// growth; the input is streamed line by line.
func ReadRecords(r io.Reader, file string, opt ReadOptions) (*likelihood.Data, *ReadReport, error) {
	p := newParser(r, file, opt)
	p.size = opt.SizeHint
	if st, ok := r.(interface{ Stat() (os.FileInfo, error) }); ok {
		if fi, err := st.Stat(); err == nil && fi.Mode().IsRegular() && p.size <= 0 {
			p.size = fi.Size()
		}
	}
	if err := p.run(); err != nil {
		return nil, nil, err
	}
	return p.data, p.rep, nil
}
