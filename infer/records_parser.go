// The records reader's parser state, line reading and field splitting
// (CSV/TSV with quotes); the header is in records_header.go and the rows in
// records_rows.go.

package infer

import (
	"bufio"
	"bytes"
	"fmt"
	"io"
	"strings"

	"edgewise/likelihood"
)

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

	cur       *likelihood.Record // &curVal while a record is open, else nil
	curVal    likelihood.Record
	curRepVal RecordReport
	curRep    *RecordReport
	curID     string
	ended     bool // an end row closed the current record
	endLine   int
	lastLine  int // line of the last event row
	state     string
	stateSet  bool
	lastT     float64 // time of the last row (trace) or event
	lastText  []byte  // the time field of the last row
	haveT     bool
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
			if len(p.long) > MaxLineBytes {
				return &ReadError{File: p.file, Line: p.lineNo + 1, Msg: fmt.Sprintf("line longer than %d bytes: not a records file", MaxLineBytes)}
			}
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
		if bytes.HasPrefix(b, []byte("\xff\xfe")) || bytes.HasPrefix(b, []byte("\xfe\xff")) || bytes.IndexByte(b, 0) >= 0 {
			return &ReadError{File: p.file, Line: 1, Msg: "UTF-16 text (or binary data): save the file as UTF-8"}
		}
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
