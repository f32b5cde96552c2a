package taxonomy

import (
	"bufio"
	"io"
	"strings"
)

const formatIndent = "  "

// Format writes t in the canonical text form (see the package comment).
func Format(w io.Writer, t *Taxonomy) error {
	bw := bufio.NewWriter(w)
	var line []byte
	for i := range t.nodes {
		line = appendLine(line[:0], &t.nodes[i])
		if _, err := bw.Write(line); err != nil {
			return err
		}
	}
	return bw.Flush()
}

// String returns t in the canonical text form.
func (t *Taxonomy) String() string {
	var b strings.Builder
	_ = Format(&b, t) // a strings.Builder never fails
	return b.String()
}

func appendLine(buf []byte, n *Node) []byte {
	for range n.Depth {
		buf = append(buf, formatIndent...)
	}
	buf = append(buf, n.Key...)
	if n.Description != "" || n.Name != n.Key {
		buf = append(buf, " | "...)
		buf = appendEscaped(buf, n.Name)
	}
	if n.Description != "" {
		buf = append(buf, " | "...)
		buf = appendEscaped(buf, n.Description)
	}
	return append(buf, '\n')
}

// formattedLen is the length appendLine gives, without the line end.
func formattedLen(key, name, desc string, depth int) int {
	n := depth*len(formatIndent) + len(key)
	if desc != "" || name != key {
		n += 3 + escapedLen(name)
	}
	if desc != "" {
		n += 3 + escapedLen(desc)
	}
	return n
}

func appendEscaped(buf []byte, s string) []byte {
	for i := 0; i < len(s); i++ {
		if c := s[i]; c == '|' || c == '\\' {
			buf = append(buf, '\\')
		}
		buf = append(buf, s[i])
	}
	return buf
}

func escapedLen(s string) int {
	return len(s) + strings.Count(s, "|") + strings.Count(s, `\`)
}
