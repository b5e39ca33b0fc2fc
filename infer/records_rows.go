// Data rows of a records file: record IDs, times, labels, end rows, state
// traces, and the cutting of events into records.

package infer

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"math"
	"slices"
	"strconv"
	"strings"

	"edgewise/likelihood"
)

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
		return 0, p.errAt(col, fieldName, "label %s is renamed to an empty label", clip(file))
	}
	i, ok := p.modelIdx[model]
	if !ok {
		if p.fixed {
			return 0, p.errAt(col, fieldName, "unknown label %s (known: %s)", clip(file), clipList(p.opt.Known))
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
		return &ReadError{File: p.file, Line: p.curRep.FirstLine, Msg: fmt.Sprintf("record %s is empty: %s", clip(p.curID), what)}
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
			if len(id) > MaxRecordIDBytes {
				return p.errAt(p.col(p.colRecord), "record", "record name %s is longer than %d bytes", clip(id), MaxRecordIDBytes)
			}
			sid := string(id)
			if last, ok := p.seenIDs[sid]; ok {
				return p.errAt(p.col(p.colRecord), "record", "record %s reappears after other records (its rows ended on line %d); rows of a record must be contiguous", clip(sid), last)
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
		return p.errAt(0, "", "row after the end of record %s (end row on line %d)", clip(p.curID), p.endLine)
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
			return p.errAt(p.col(p.colTime), "time", "%s is not a number in decimal notation", clip(tf))
		}
		var err error
		t, err = strconv.ParseFloat(string(tf), 64)
		if err != nil {
			var ne *strconv.NumError
			if errors.As(err, &ne) && ne.Err == strconv.ErrRange {
				return p.errAt(p.col(p.colTime), "time", "%s is out of range", clip(tf))
			}
			return p.errAt(p.col(p.colTime), "time", "%s is not a number", clip(tf))
		}
		if math.IsNaN(t) || math.IsInf(t, 0) {
			return p.errAt(p.col(p.colTime), "time", "%s is not a finite number", clip(tf))
		}
	}
	if t == 0 {
		// A non-zero mantissa that rounds to 0 has underflowed.
		mant := tf
		if i := bytes.IndexAny(tf, "eE"); i >= 0 {
			mant = tf[:i]
		}
		if bytes.ContainsAny(mant, "123456789") {
			return p.errAt(p.col(p.colTime), "time", "%s underflows to 0", clip(tf))
		}
	}
	if msg := checkTime(t); msg != "" {
		return p.errAt(p.col(p.colTime), "time", "%s %s", clip(tf), msg)
	}
	if p.haveT {
		if t < p.lastT {
			return p.errAt(p.col(p.colTime), "time", "%v is earlier than the previous time %v (line %d) in record %s: times must not decrease within a record", t, p.lastT, p.lastLine, clip(p.curID))
		}
		if msg := checkGap(t - p.lastT); msg != "" {
			return p.errAt(p.col(p.colTime), "time", "%s: the gap %v to the previous time (line %d) %s", clip(tf), t-p.lastT, p.lastLine, msg)
		}
		if t == p.lastT && !sameDecimal(tf, p.lastText) {
			return p.errAt(p.col(p.colTime), "time", "%s and %s (line %d) are different numbers but the same float64 (%v): the times carry more significant digits than a float64 holds (about 15); subtract an offset so that times start near 0", clip(tf), clip(p.lastText), p.lastLine, t)
		}
	}
	p.lastText = append(p.lastText[:0], tf...)
	p.curRep.Rows++
	p.curRep.LastLine = p.lineNo
	if p.rep.Trace {
		return p.traceRow(t)
	}
	lf := p.field(p.colLabel)
	if len(lf) == 0 {
		return p.errAt(p.col(p.colLabel), "label", "empty")
	}
	if len(lf) > MaxLabelBytes {
		return p.errAt(p.col(p.colLabel), "label", "%s is longer than %d bytes, the limit of a label", clip(lf), MaxLabelBytes)
	}
	if i := bytes.IndexFunc(lf, isControl); i >= 0 {
		return p.errAt(p.col(p.colLabel)+i, "label", "%s contains a control character", clip(lf))
	}
	if string(lf) == EndLabel {
		if p.curLen() == 0 {
			return p.errAt(p.col(p.colLabel), "label", "end row before any event of record %s", clip(p.curID))
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
	// The open record lives in the parser (no allocation per record).
	p.curVal = likelihood.Record{ID: id, End: math.NaN()}
	p.cur = &p.curVal
	p.start = len(p.times)
	p.curRepVal = RecordReport{ID: id, FirstLine: p.lineNo}
	p.curRep = &p.curRepVal
	p.curID = id
	p.ended = false
	p.haveT = false
	p.stateSet = false
}

func (p *parser) event(t float64, l uint8) {
	if n := len(p.times); n > p.start && p.times[n-1] == t {
		if p.curRep.Duplicates == 0 {
			p.curRep.ZeroGapLine, p.curRep.ZeroGapEvent = p.lineNo, p.curRep.Events+1
		}
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
	scale := float64(p.size) / float64(p.bytes) * 1.03
	// Many records (short traces): size the record tables and the map of
	// record IDs the same way, so that they do not grow by copying.
	if nr := len(p.data.Records); nr >= 64 {
		er := int(scale*float64(nr)) + 64
		p.data.Records = slices.Grow(p.data.Records, er-nr)
		p.rep.Records = slices.Grow(p.rep.Records, er-nr)
		seen := make(map[string]int, er)
		for k, v := range p.seenIDs {
			seen[k] = v
		}
		p.seenIDs = seen
		p.bounds = slices.Grow(p.bounds, er-nr)
	}
	est := int(scale*float64(len(p.times))) + 1024
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
	if len(sf) > MaxLabelBytes {
		return p.errAt(p.col(p.colState), "state", "%s is longer than %d bytes, the limit of a state name", clip(sf), MaxLabelBytes)
	}
	if i := bytes.IndexFunc(sf, isControl); i >= 0 {
		return p.errAt(p.col(p.colState)+i, "state", "%s contains a control character", clip(sf))
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
