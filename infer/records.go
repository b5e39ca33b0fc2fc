package infer

import (
	"bufio"
	"bytes"
	"errors"
	"fmt"
	"io"
	"math"
	"math/bits"
	"os"
	"path/filepath"
	"strconv"
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
	End        bool // the record's end time is known (an end row, or a trace)
}

// Duplicates returns the number of zero gaps over all records.
func (r *ReadReport) Duplicates() int {
	n := 0
	for _, rr := range r.Records {
		n += rr.Duplicates
	}
	return n
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

type span struct{ lo, hi int } // field bytes line[lo:hi], column lo+1

type labelCache struct {
	name string
	idx  uint8
}

type parser struct {
	br   *bufio.Reader
	file string
	opt  ReadOptions
	data *likelihood.Data
	rep  *ReadReport

	line   []byte
	long   []byte // accumulates lines longer than the buffer
	lineNo int
	delim  byte
	fields []span
	nCols  int

	colTime, colLabel, colRecord, colState int

	labelIdx map[string]uint8 // file label (or change name) -> index
	modelIdx map[string]uint8 // model label -> index
	fixed    bool             // label set given by Known
	seenIDs  map[string]int   // record ID -> last line of its rows
	states   map[string]string
	pairBuf  []byte

	// Events of all records go to one pair of slices, cut into records at
	// the end, so that growth copies are shared and nothing old is kept.
	times  []float64
	labels []uint8
	bounds [][2]int // per closed record, its [start, end) in times
	start  int      // start of the current record in times
	size   int64    // input size in bytes when known, for preallocation
	bytes  int64    // bytes read so far
	hinted bool
	last   []labelCache

	cur      *likelihood.Record
	curRep   *RecordReport
	curID    string
	ended    bool // an end row closed the current record
	endLine  int
	lastLine int // line of the last event row
	state    string
	stateSet bool
	lastT    float64 // time of the last row (trace) or event
	haveT    bool
}

func newParser(r io.Reader, file string, opt ReadOptions) *parser {
	return &parser{
		br:       bufio.NewReaderSize(r, 1<<16),
		file:     file,
		opt:      opt,
		data:     &likelihood.Data{},
		rep:      &ReadReport{File: file},
		labelIdx: make(map[string]uint8),
		modelIdx: make(map[string]uint8),
		seenIDs:  make(map[string]int),
		states:   make(map[string]string),
		colTime:  -1, colLabel: -1, colRecord: -1, colState: -1,
	}
}

func (p *parser) errAt(col int, field, format string, args ...any) error {
	return &ReadError{File: p.file, Line: p.lineNo, Column: col, Field: field, Msg: fmt.Sprintf(format, args...)}
}

// next reads the next line into p.line without its line ending; it returns
// io.EOF at the end.
func (p *parser) next() error {
	b, err := p.br.ReadSlice('\n')
	if err == bufio.ErrBufferFull {
		p.long = append(p.long[:0], b...)
		for err == bufio.ErrBufferFull {
			b, err = p.br.ReadSlice('\n')
			p.long = append(p.long, b...)
		}
		b = p.long
	}
	if err != nil && err != io.EOF {
		return fmt.Errorf("%s: %w", p.file, err)
	}
	if err == io.EOF && len(b) == 0 {
		return io.EOF
	}
	p.lineNo++
	p.rep.Lines++
	p.bytes += int64(len(b))
	if p.lineNo == 1 {
		b = bytes.TrimPrefix(b, []byte("\xef\xbb\xbf"))
	}
	if n := len(b); n > 0 && b[n-1] == '\n' {
		b = b[:n-1]
	}
	if n := len(b); n > 0 && b[n-1] == '\r' {
		b = b[:n-1]
	}
	p.line = b
	return nil
}

// skip reports whether the current line is blank or a comment.
func (p *parser) skip() bool {
	if len(p.line) > 0 && p.line[0] != ' ' && p.line[0] != '\t' && p.line[0] != '#' {
		return false
	}
	t := bytes.TrimLeft(p.line, " \t")
	if len(t) == 0 {
		return true
	}
	if t[0] == '#' {
		p.rep.Comments++
		if p.rep.Comments == 1 {
			p.rep.Stamp = strings.TrimSpace(string(t[1:]))
		}
		return true
	}
	return false
}

func isSpace(c byte, delim byte) bool { return (c == ' ' || c == '\t') && c != delim }

// trimSpan is line[a:b] without the spaces (and tabs, unless tab is the
// delimiter) at either end.
func trimSpan(line []byte, a, b int, d byte) span {
	for a < b && isSpace(line[a], d) {
		a++
	}
	for b > a && isSpace(line[b-1], d) {
		b--
	}
	return span{a, b}
}

// split cuts p.line into fields, unquoting in place.
func (p *parser) split() error {
	p.fields = p.fields[:0]
	line := p.line
	d := p.delim
	// Fast path, one pass: fields without quotes. (Testing eight bytes at
	// a time for a delimiter or a quote was measured slower on lines of
	// ~20 bytes.)
	lo := 0
	quoted := false
	for i, c := range line {
		if c == d {
			p.fields = append(p.fields, trimSpan(line, lo, i, d))
			lo = i + 1
		} else if c == '"' {
			quoted = true
			break
		}
	}
	if !quoted {
		p.fields = append(p.fields, trimSpan(line, lo, len(line), d))
		return nil
	}
	p.fields = p.fields[:0]
	// Slow path with quotes: rewrite unquoted content in place; w <= r.
	r := 0
	for {
		for r < len(line) && isSpace(line[r], d) {
			r++
		}
		if r < len(line) && line[r] == '"' {
			start := r
			r++
			w := r
			closed := false
			for r < len(line) {
				if line[r] == '"' {
					if r+1 < len(line) && line[r+1] == '"' {
						line[w] = '"'
						w++
						r += 2
						continue
					}
					closed = true
					r++
					break
				}
				line[w] = line[r]
				w++
				r++
			}
			if !closed {
				return p.errAt(start+1, "", "quoted field is not closed on this line")
			}
			p.fields = append(p.fields, span{start + 1, w})
			for r < len(line) && isSpace(line[r], d) {
				r++
			}
			if r == len(line) {
				return nil
			}
			if line[r] != d {
				return p.errAt(r+1, "", "unexpected %q after a quoted field", line[r])
			}
			r++
			continue
		}
		i := bytes.IndexByte(line[r:], d)
		hi := len(line)
		if i >= 0 {
			hi = r + i
		}
		if q := bytes.IndexByte(line[r:hi], '"'); q >= 0 {
			return p.errAt(r+q+1, "", "a quote inside an unquoted field")
		}
		b := hi
		for b > r && isSpace(line[b-1], d) {
			b--
		}
		p.fields = append(p.fields, span{r, b})
		if i < 0 {
			return nil
		}
		r = hi + 1
	}
}

func (p *parser) field(i int) []byte { return p.line[p.fields[i].lo:p.fields[i].hi] }
func (p *parser) col(i int) int      { return p.fields[i].lo + 1 }

func (p *parser) header() error {
	d := p.opt.Delimiter
	if d == 0 {
		hasTab := bytes.IndexByte(p.line, '\t') >= 0
		hasComma := bytes.IndexByte(p.line, ',') >= 0
		ext := strings.ToLower(filepath.Ext(p.file))
		switch {
		case hasTab && !hasComma:
			d = '\t'
		case hasComma:
			d = ','
		case ext == ".tsv" || ext == ".tab":
			d = '\t'
		default:
			d = ','
		}
	}
	if d != ',' && d != '\t' {
		return fmt.Errorf("%s: delimiter %q: want ',' or tab", p.file, d)
	}
	p.delim = byte(d)
	p.rep.Delimiter = d
	if err := p.split(); err != nil {
		return err
	}
	p.nCols = len(p.fields)
	seen := make(map[string]int)
	for i := range p.fields {
		name := string(p.field(i))
		p.rep.Columns = append(p.rep.Columns, name)
		key := strings.ToLower(name)
		if j, ok := seen[key]; ok && key != "" {
			return p.errAt(p.col(i), "", "column %q repeats column %d", name, j+1)
		}
		seen[key] = i
		switch key {
		case "time":
			p.colTime = i
		case "label":
			p.colLabel = i
		case "record":
			p.colRecord = i
		case "state":
			p.colState = i
		default:
			p.rep.Ignored = append(p.rep.Ignored, name)
		}
	}
	trace := p.opt.Trace || (p.colState >= 0 && p.colLabel < 0)
	p.rep.Trace = trace
	missing := func(name string) error {
		for _, c := range p.rep.Columns {
			if strings.Contains(c, "\r") {
				return p.errAt(0, "", "missing column %q: the file's lines end with a carriage return only (old Mac format); convert the line endings to LF or CRLF", name)
			}
		}
		return p.errAt(0, "", "missing column %q (header has %s)", name, strings.Join(p.rep.Columns, ", "))
	}
	if p.colTime < 0 {
		return missing("time")
	}
	if trace {
		if p.colState < 0 {
			return missing("state")
		}
		if p.colLabel >= 0 {
			p.rep.Ignored = append(p.rep.Ignored, p.rep.Columns[p.colLabel])
			p.colLabel = -1
		}
	} else {
		if p.colLabel < 0 {
			return missing("label")
		}
		if p.colState >= 0 {
			p.rep.Ignored = append(p.rep.Ignored, p.rep.Columns[p.colState])
			p.colState = -1
		}
	}
	if len(p.opt.Known) > 0 {
		if len(p.opt.Known) > 256 {
			return fmt.Errorf("%s: %d known labels; at most 256", p.file, len(p.opt.Known))
		}
		p.fixed = true
		for _, l := range p.opt.Known {
			if _, dup := p.modelIdx[l]; dup {
				return fmt.Errorf("%s: known label %q given twice", p.file, l)
			}
			if l == EndLabel {
				return fmt.Errorf("%s: %q is reserved for end rows and cannot be a label", p.file, l)
			}
			p.modelIdx[l] = uint8(len(p.data.Labels))
			p.data.Labels = append(p.data.Labels, l)
		}
	}
	return nil
}

func (p *parser) run() error {
	for {
		err := p.next()
		if err == io.EOF {
			return fmt.Errorf("%s: no header line (want columns time and label)", p.file)
		}
		if err != nil {
			return err
		}
		if !p.skip() {
			break
		}
	}
	if err := p.header(); err != nil {
		return err
	}
	for {
		err := p.next()
		if err == io.EOF {
			break
		}
		if err != nil {
			return err
		}
		if p.skip() {
			continue
		}
		if err := p.row(); err != nil {
			return err
		}
	}
	if err := p.closeRecord(); err != nil {
		return err
	}
	if len(p.data.Records) == 0 {
		return &ReadError{File: p.file, Line: p.lineNo, Msg: "no records: the file has a header but no data rows"}
	}
	for i, b := range p.bounds {
		p.data.Records[i].Time = p.times[b[0]:b[1]:b[1]]
		p.data.Records[i].Label = p.labels[b[0]:b[1]:b[1]]
	}
	return nil
}

// lookup returns the index of file label name, registering it.
func (p *parser) lookup(name []byte, col int) (uint8, error) {
	for _, c := range p.last {
		if string(name) == c.name {
			return c.idx, nil
		}
	}
	if i, ok := p.labelIdx[string(name)]; ok {
		return i, nil
	}
	file := string(name)
	model := file
	if m, ok := p.opt.Labels[file]; ok {
		model = m
	}
	fieldName := "label"
	if p.rep.Trace {
		fieldName = "state"
	}
	if model == "" {
		return 0, p.errAt(col, fieldName, "label %q is renamed to an empty label", file)
	}
	i, ok := p.modelIdx[model]
	if !ok {
		if p.fixed {
			return 0, p.errAt(col, fieldName, "unknown label %q (known: %s)", file, strings.Join(p.opt.Known, ", "))
		}
		if model == EndLabel {
			return 0, p.errAt(col, fieldName, "%q is reserved for end rows and cannot be a label", model)
		}
		if len(p.data.Labels) == 256 {
			return 0, p.errAt(col, fieldName, "more than 256 distinct labels")
		}
		i = uint8(len(p.data.Labels))
		p.modelIdx[model] = i
		p.data.Labels = append(p.data.Labels, model)
	}
	p.labelIdx[file] = i
	if len(p.last) < 4 {
		p.last = append(p.last, labelCache{file, i})
	}
	return i, nil
}

func (p *parser) closeRecord() error {
	if p.cur == nil {
		return nil
	}
	if p.curLen() == 0 {
		what := "no events"
		if p.rep.Trace {
			what = fmt.Sprintf("no change of state in %d samples", p.curRep.Rows)
		}
		return &ReadError{File: p.file, Line: p.curRep.FirstLine, Msg: fmt.Sprintf("record %q is empty: %s", p.curID, what)}
	}
	if p.rep.Trace {
		p.cur.End = p.lastT
		p.curRep.End = true
	}
	p.seenIDs[p.curID] = p.curRep.LastLine
	p.bounds = append(p.bounds, [2]int{p.start, len(p.times)})
	p.data.Records = append(p.data.Records, *p.cur)
	p.rep.Records = append(p.rep.Records, *p.curRep)
	p.cur, p.curRep = nil, nil
	return nil
}

// isControl reports a control character, which a label or state name in a
// records file must not contain.
func isControl(r rune) bool { return r < 0x20 || r == 0x7f }

// isNaNOrInf reports whether b spells NaN or an infinity, which are
// refused with their own message.
func isNaNOrInf(b []byte) bool {
	switch strings.ToLower(strings.TrimLeft(string(b), "+-")) {
	case "nan", "inf", "infinity":
		return true
	}
	return false
}

func (p *parser) row() error {
	if err := p.split(); err != nil {
		return err
	}
	if len(p.fields) != p.nCols {
		c := len(p.line) + 1
		if len(p.fields) > p.nCols {
			c = p.col(p.nCols)
		}
		return p.errAt(c, "", "row has %d fields, header has %d", len(p.fields), p.nCols)
	}
	// Record.
	if p.colRecord >= 0 {
		id := p.field(p.colRecord)
		if len(bytes.TrimSpace(id)) == 0 {
			return p.errAt(p.col(p.colRecord), "record", "empty record name (the file has a record column, so every row needs one)")
		}
		if p.cur == nil || string(id) != p.curID {
			sid := string(id)
			if last, ok := p.seenIDs[sid]; ok {
				return p.errAt(p.col(p.colRecord), "record", "record %q reappears after other records (its rows ended on line %d); rows of a record must be contiguous", sid, last)
			}
			if err := p.closeRecord(); err != nil {
				return err
			}
			p.open(sid)
		}
	} else if p.cur == nil {
		if len(p.data.Records) > 0 {
			return p.errAt(0, "", "row after the end of the record (end row on line %d)", p.endLine)
		}
		p.open("")
	}
	if p.ended {
		return p.errAt(0, "", "row after the end of record %q (end row on line %d)", p.curID, p.endLine)
	}
	// Time.
	tf := p.field(p.colTime)
	if len(tf) == 0 {
		return p.errAt(p.col(p.colTime), "time", "empty")
	}
	t, ok := parseDecimal(tf) // always finite when ok
	if !ok {
		// Plain decimal notation only: Go's parser would also take
		// "1_000", hexadecimal floats and "Inf" spellings, which no
		// instrument writes and which hide a damaged file.
		if i := bytes.IndexFunc(tf, func(r rune) bool { return !strings.ContainsRune("0123456789+-.eE", r) }); i >= 0 && !isNaNOrInf(tf) {
			return p.errAt(p.col(p.colTime), "time", "%q is not a number in decimal notation", tf)
		}
		var err error
		t, err = strconv.ParseFloat(string(tf), 64)
		if err != nil {
			var ne *strconv.NumError
			if errors.As(err, &ne) && ne.Err == strconv.ErrRange {
				return p.errAt(p.col(p.colTime), "time", "%q is out of range", tf)
			}
			return p.errAt(p.col(p.colTime), "time", "%q is not a number", tf)
		}
		if math.IsNaN(t) || math.IsInf(t, 0) {
			return p.errAt(p.col(p.colTime), "time", "%q is not a finite number", tf)
		}
	}
	if t == 0 {
		// A non-zero mantissa that rounds to 0 has underflowed.
		mant := tf
		if i := bytes.IndexAny(tf, "eE"); i >= 0 {
			mant = tf[:i]
		}
		if bytes.ContainsAny(mant, "123456789") {
			return p.errAt(p.col(p.colTime), "time", "%q underflows to 0", tf)
		}
	}
	if p.haveT && t < p.lastT {
		return p.errAt(p.col(p.colTime), "time", "%v is earlier than the previous time %v (line %d) in record %q: times must not decrease within a record", t, p.lastT, p.lastLine, p.curID)
	}
	p.curRep.Rows++
	p.curRep.LastLine = p.lineNo
	if p.rep.Trace {
		return p.traceRow(t)
	}
	lf := p.field(p.colLabel)
	if len(lf) == 0 {
		return p.errAt(p.col(p.colLabel), "label", "empty")
	}
	if i := bytes.IndexFunc(lf, isControl); i >= 0 {
		return p.errAt(p.col(p.colLabel)+i, "label", "%q contains a control character", lf)
	}
	if string(lf) == EndLabel {
		if p.curLen() == 0 {
			return p.errAt(p.col(p.colLabel), "label", "end row before any event of record %q", p.curID)
		}
		p.cur.End = t
		p.curRep.End = true
		p.ended = true
		p.endLine = p.lineNo
		if p.colRecord < 0 {
			return p.closeRecord()
		}
		return nil
	}
	l, err := p.lookup(lf, p.col(p.colLabel))
	if err != nil {
		return err
	}
	p.event(t, l)
	return nil
}

func (p *parser) open(id string) {
	p.cur = &likelihood.Record{ID: id, End: math.NaN()}
	p.start = len(p.times)
	p.curRep = &RecordReport{ID: id, FirstLine: p.lineNo}
	p.curID = id
	p.ended = false
	p.haveT = false
	p.stateSet = false
}

func (p *parser) event(t float64, l uint8) {
	if n := len(p.times); n > p.start && p.times[n-1] == t {
		p.curRep.Duplicates++
	}
	if !p.hinted && len(p.times) == 4096 {
		p.grow()
	}
	p.times = append(p.times, t)
	p.labels = append(p.labels, l)
	p.curRep.Events++
	p.lastT, p.haveT, p.lastLine = t, true, p.lineNo
}

func (p *parser) curLen() int { return len(p.times) - p.start }

// grow sizes the event slices once, from the input size and the bytes per
// event so far (plus 3%), when the input size is known.
func (p *parser) grow() {
	p.hinted = true
	if p.size <= 0 || p.bytes <= 0 {
		return
	}
	est := int(float64(p.size)/float64(p.bytes)*float64(len(p.times))*1.03) + 1024
	if est <= cap(p.times) {
		return
	}
	t := make([]float64, len(p.times), est)
	copy(t, p.times)
	l := make([]uint8, len(p.labels), est)
	copy(l, p.labels)
	p.times, p.labels = t, l
}

func (p *parser) traceRow(t float64) error {
	sf := p.field(p.colState)
	if len(sf) == 0 {
		return p.errAt(p.col(p.colState), "state", "empty")
	}
	if i := bytes.IndexFunc(sf, isControl); i >= 0 {
		return p.errAt(p.col(p.colState)+i, "state", "%q contains a control character", sf)
	}
	p.lastT, p.haveT, p.lastLine = t, true, p.lineNo
	if p.stateSet && string(sf) == p.state {
		return nil
	}
	s, ok := p.states[string(sf)]
	if !ok {
		s = string(sf)
		p.states[s] = s
	}
	if p.stateSet {
		p.pairBuf = append(append(append(p.pairBuf[:0], p.state...), '>'), s...)
		l, err := p.lookup(p.pairBuf, p.col(p.colState))
		if err != nil {
			return err
		}
		p.event(t, l)
	}
	p.state, p.stateSet = s, true
	return nil
}

// WriteRecords writes d as CSV that ReadRecords reads back to the same
// data: a header record,time,label (the record column only when there is
// more than one record or a record has an ID), times in the shortest form
// that parses back to the same float64, and an end row for each record whose
// End is known. Fields are quoted when needed.
func WriteRecords(w io.Writer, d *likelihood.Data) error {
	for _, l := range d.Labels {
		if l == EndLabel || l == "" || strings.Contains(l, "\n") {
			return fmt.Errorf("write records: label %q cannot be written (empty, reserved or with a newline)", l)
		}
	}
	withID := len(d.Records) > 1 || (len(d.Records) == 1 && d.Records[0].ID != "")
	bw := bufio.NewWriterSize(w, 1<<16)
	if withID {
		bw.WriteString("record,time,label\n")
	} else {
		bw.WriteString("time,label\n")
	}
	names := make([]string, len(d.Labels))
	for i, l := range d.Labels {
		names[i] = quoteField(l)
	}
	line := make([]byte, 0, 64)
	for i := range d.Records {
		r := &d.Records[i]
		if withID && r.ID == "" && len(d.Records) > 1 {
			return fmt.Errorf("write records: record %d has an empty ID", i+1)
		}
		if strings.Contains(r.ID, "\n") {
			return fmt.Errorf("write records: record ID %q has a line break", r.ID)
		}
		id := quoteField(r.ID)
		put := func(t float64, lab string) {
			line = line[:0]
			if withID {
				line = append(line, id...)
				line = append(line, ',')
			}
			line = strconv.AppendFloat(line, t, 'g', -1, 64)
			line = append(line, ',')
			line = append(line, lab...)
			line = append(line, '\n')
			bw.Write(line)
		}
		for k, t := range r.Time {
			l := int(r.Label[k])
			if l >= len(names) {
				return fmt.Errorf("write records: record %q event %d: label index %d out of range", r.ID, k+1, l)
			}
			put(t, names[l])
		}
		if !math.IsNaN(r.End) {
			put(r.End, EndLabel)
		}
	}
	return bw.Flush()
}

// quoteField quotes s when the reader would not read it back unchanged.
func quoteField(s string) string {
	if s == "" {
		return s
	}
	need := strings.ContainsAny(s, ",\t\"\r\n") || s[0] == ' ' || s[len(s)-1] == ' ' || s[0] == '#'
	if !need {
		return s
	}
	return `"` + strings.ReplaceAll(s, `"`, `""`) + `"`
}

// pow10 holds the powers of ten that are exact in float64.
var pow10 = [...]float64{1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10,
	1e11, 1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22}

// pow5 holds 5^0 .. 5^27, the powers of five below 2^64.
var pow5 = [...]uint64{1, 5, 25, 125, 625, 3125, 15625, 78125, 390625,
	1953125, 9765625, 48828125, 244140625, 1220703125, 6103515625,
	30517578125, 152587890625, 762939453125, 3814697265625, 19073486328125,
	95367431640625, 476837158203125, 2384185791015625, 11920928955078125,
	59604644775390625, 298023223876953125, 1490116119384765625,
	7450580596923828125}

// parseDecimal converts a plain decimal number ([+-]digits[.digits][e[+-]digits])
// exactly as strconv.ParseFloat does (correctly rounded, round half to
// even), for the common cases, and reports false for anything else, which
// the caller hands to strconv:
//
//   - digits forming an integer m < 2^53 and a decimal exponent within
//     +-22: Clinger's fast path (Proc. PLDI 1990). m and 10^|e| are exact
//     in float64, so one multiplication or division is correctly rounded.
//   - at most 19 digits, leading zeros included (so m < 2^64), and an
//     exponent in [-27, 0]
//     (the times an instrument or a float formatter writes, up to 17
//     digits): m / 10^k = (m / 5^k) 2^-k with 5^k < 2^64. The quotient of
//     m 2^s by 5^k is taken in 128-bit integer arithmetic with s chosen so
//     that it has 63 or 64 bits; its top 53 bits are rounded half to even
//     using the dropped bits and the remainder (a nonzero remainder breaks
//     a tie upwards), and the power of two is put in the exponent.
func parseDecimal(b []byte) (float64, bool) {
	i := 0
	neg := false
	if i < len(b) && (b[i] == '-' || b[i] == '+') {
		neg = b[i] == '-'
		i++
	}
	// Digits before and after the point, leading zeros included (they
	// only count towards the limit of 19 digits, which keeps m < 2^64).
	var m uint64
	s0 := i
	m, i = decimalDigits(b, i, m)
	nd := i - s0
	exp := 0
	if i < len(b) && b[i] == '.' {
		i++
		s1 := i
		m, i = decimalDigits(b, i, m)
		exp = s1 - i
		nd -= exp
	}
	if nd == 0 || nd > 19 {
		return 0, false
	}
	if i < len(b) {
		if b[i] != 'e' && b[i] != 'E' {
			return 0, false
		}
		i++
		eneg := false
		if i < len(b) && (b[i] == '-' || b[i] == '+') {
			eneg = b[i] == '-'
			i++
		}
		if i == len(b) {
			return 0, false
		}
		e := 0
		for ; i < len(b); i++ {
			c := b[i]
			if c < '0' || c > '9' || e > 1000 {
				return 0, false
			}
			e = e*10 + int(c-'0')
		}
		if eneg {
			e = -e
		}
		exp += e
	}
	var f float64
	switch {
	case m == 0:
	case exp == 0:
		f = float64(m) // Go converts integers with round half to even
	case m < 1<<53 && exp > 0 && exp <= 22:
		f = float64(m) * pow10[exp]
	case m < 1<<53 && exp < 0 && exp >= -22:
		f = float64(m) / pow10[-exp]
	case exp < 0 && exp >= -27:
		f = divPow10(m, -exp)
	default:
		return 0, false
	}
	if neg {
		f = -f
	}
	return f, true
}

// decimalDigits appends the decimal digits of b from position i to m
// (m = 10 m + digit; it wraps past 19 digits, which the caller rejects) and
// returns m and the position of the first non-digit. (Eight digits at a
// time by one 64-bit load was measured slower on times of 6-18 digits.)
func decimalDigits(b []byte, i int, m uint64) (uint64, int) {
	for ; i < len(b); i++ {
		c := b[i] - '0'
		if c > 9 {
			break
		}
		m = m*10 + uint64(c)
	}
	return m, i
}

// divPow10 returns m / 10^k correctly rounded (round half to even), for
// m > 0 and 0 < k <= 27; see parseDecimal.
func divPow10(m uint64, k int) float64 {
	d := pow5[k]
	s := 63 + bits.Len64(d) - bits.Len64(m) // 0 <= s <= 126
	var hi, lo uint64
	switch {
	case s >= 64:
		hi = m << (s - 64)
	case s > 0:
		hi, lo = m>>(64-s), m<<s
	default:
		lo = m
	}
	// hi < d because m 2^s < 2^(63 + len(d)) <= d 2^64, so the quotient
	// fits in 64 bits; it is at least 2^62.
	q, r := bits.Div64(hi, lo, d)
	drop := bits.Len64(q) - 53 // 10 or 11
	mant := q >> drop
	rest := q & (1<<drop - 1)
	half := uint64(1) << (drop - 1)
	if rest > half || (rest == half && (r != 0 || mant&1 == 1)) {
		mant++
	}
	// value = mant 2^e2 with mant in [2^52, 2^53].
	e2 := drop - s - k
	if mant == 1<<53 {
		mant >>= 1
		e2++
	}
	// Biased exponent of a normal number; here always in range
	// (10^-27 <= value < 2^64), so no subnormal or overflow case.
	return math.Float64frombits(uint64(e2+52+1023)<<52 | mant&(1<<52-1))
}
