package taxonomy

import (
	"bufio"
	"bytes"
	"errors"
	"fmt"
	"io"
	"os"
	"strings"
	"unicode"
	"unicode/utf8"
)

// Parse reads a taxonomy in the text format under the default limits.
func Parse(r io.Reader) (*Taxonomy, error) {
	return DefaultLimits().Parse(r)
}

// ParseString parses s under the default limits.
func ParseString(s string) (*Taxonomy, error) {
	return DefaultLimits().Parse(strings.NewReader(s))
}

// ParseFile parses the file at path under the default limits; its errors
// carry the path.
func ParseFile(path string) (*Taxonomy, error) {
	return DefaultLimits().ParseFile(path)
}

// Parse reads a taxonomy in the text format under l. Problems in the text
// come back as an ErrorList; a failure of r itself comes back wrapped as is.
func (l Limits) Parse(r io.Reader) (*Taxonomy, error) {
	return l.parse(r, "")
}

// ParseFile parses the file at path under l; its errors carry the path.
func (l Limits) ParseFile(path string) (*Taxonomy, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("read taxonomy: %w", err)
	}
	defer f.Close()
	return l.parse(f, path)
}

func (l Limits) parse(r io.Reader, file string) (*Taxonomy, error) {
	b := newBuilder(l, file)
	maxLen := b.lim.MaxLineLen
	// Room for the longest allowed line plus "\r\n": a longer line fills the
	// buffer and is reported without ever being held whole in memory.
	br := bufio.NewReaderSize(r, maxLen+2)
	p := lineParser{b: b, prev: -1}
	for n := 1; ; n++ {
		line, tooLong, err := readLine(br, maxLen)
		if err != nil && err != io.EOF {
			if file != "" {
				return nil, fmt.Errorf("read taxonomy %s line %d: %w", file, n, err)
			}
			return nil, fmt.Errorf("read taxonomy line %d: %w", n, err)
		}
		if len(line) == 0 && !tooLong && err == io.EOF {
			break
		}
		if n == 1 {
			line = bytes.TrimPrefix(line, []byte("\uFEFF"))
		}
		if !p.line(n, string(line), tooLong) || err == io.EOF {
			break
		}
	}
	return b.finish()
}

// readLine returns the next line without its line end. A line longer than
// max comes back as tooLong with only its first part; the rest is skipped.
func readLine(br *bufio.Reader, maxLen int) (line []byte, tooLong bool, err error) {
	line, err = br.ReadSlice('\n')
	if errors.Is(err, bufio.ErrBufferFull) {
		head := bytes.Clone(line)
		for errors.Is(err, bufio.ErrBufferFull) {
			_, err = br.ReadSlice('\n')
		}
		return head, true, err
	}
	line = bytes.TrimSuffix(line, []byte("\n"))
	line = bytes.TrimSuffix(line, []byte("\r"))
	return line, len(line) > maxLen, err
}

// lineParser turns lines into entries, tracking indentation.
type lineParser struct {
	b        *builder
	prev     int // depth of the previous label line, -1 before the first
	unit     int // spaces per level, 0 until the first indented line
	unitLine int
}

// line handles one line and reports whether parsing should go on.
func (p *lineParser) line(n int, s string, tooLong bool) bool {
	at := where{line: n}
	errs := &p.b.errs
	body := strings.TrimLeft(s, " \t")
	if strings.TrimSpace(body) == "" || body[0] == '#' {
		if tooLong {
			return errs.add(at, 0, FieldLine, "line is longer than %d bytes", p.b.lim.MaxLineLen)
		}
		return true
	}
	indent := len(s) - len(body)
	if tab := strings.IndexByte(s[:indent], '\t'); tab >= 0 {
		p.prev = max(p.prev, 0)
		return errs.add(at, tab+1, FieldIndent, "tab in indentation; indent with spaces")
	}
	depth, ok := p.depth(at, indent)
	p.prev = depth
	if !ok {
		return !errs.full
	}
	if tooLong {
		return errs.add(at, 0, FieldLine, "line is longer than %d bytes", p.b.lim.MaxLineLen)
	}
	e, ok := p.fields(at, indent, strings.TrimRightFunc(body, unicode.IsSpace))
	if !ok {
		return !errs.full
	}
	e.depth = depth
	return p.b.add(e)
}

// depth turns an indentation into a level. On bad indentation it reports the
// problem and still returns the nearest sensible level, so that one bad line
// does not make every line below it wrong too.
func (p *lineParser) depth(at where, indent int) (int, bool) {
	errs := &p.b.errs
	switch {
	case indent == 0:
		return 0, true
	case p.prev < 0:
		errs.add(at, 1, FieldIndent, "the first label must not be indented")
		return 0, false
	case p.unit == 0:
		p.unit, p.unitLine = indent, at.line
		return 1, true
	}
	d := indent / p.unit
	if indent%p.unit != 0 {
		errs.add(at, indent+1, FieldIndent, "indented by %d spaces, not a multiple of %d (the indentation unit set by line %d)", indent, p.unit, p.unitLine)
		return min(d, p.prev+1), false
	}
	if d > p.prev+1 {
		errs.add(at, indent+1, FieldIndent, "indented %d levels deeper than the label above; a label is at most one level below its parent", d-p.prev)
		return p.prev + 1, false
	}
	return d, true
}

// fields splits a label line's body (after the indentation) into key, name
// and description, undoing escapes.
func (p *lineParser) fields(at where, indent int, body string) (entry, bool) {
	errs := &p.b.errs
	col := func(i int) int { return indent + utf8.RuneCountInString(body[:i]) + 1 }
	var texts [3]string
	var cols [3]int
	nf, start, escaped := 0, 0, false
	flush := func(end int) {
		raw := body[start:end]
		lead := len(raw) - len(strings.TrimLeftFunc(raw, unicode.IsSpace))
		if escaped {
			raw = unescape(raw)
		}
		texts[nf], cols[nf] = strings.TrimSpace(raw), col(start+lead)
		nf++
	}
	for i := 0; i < len(body); i++ {
		switch body[i] {
		case '\\':
			if i+1 < len(body) && (body[i+1] == '\\' || body[i+1] == '|') {
				escaped = true
				i++
				continue
			}
			errs.add(at, col(i), [...]string{FieldKey, FieldName, FieldDescription}[nf], `unknown escape; inside text write \| for '|' and \\ for '\'`)
			return entry{}, false
		case '|':
			if nf == 2 {
				errs.add(at, col(i), FieldLine, `too many '|' separators; a line is key | name | description, and \| writes a '|' inside text`)
				return entry{}, false
			}
			flush(i)
			start, escaped = i+1, false
		}
	}
	flush(len(body))
	e := entry{key: texts[0], at: at}
	e.at.keyCol = cols[0]
	if nf > 1 {
		e.name, e.nameSet, e.at.nameCol = texts[1], true, cols[1]
	}
	if nf > 2 {
		e.desc, e.at.descCol = texts[2], cols[2]
	}
	return e, true
}

// unescape undoes \| and \\ in s, whose escapes are known to be valid.
func unescape(s string) string {
	b := make([]byte, 0, len(s))
	for i := 0; i < len(s); i++ {
		if s[i] == '\\' {
			i++
		}
		b = append(b, s[i])
	}
	return string(b)
}
