package taxonomy

import (
	"slices"
	"strconv"
	"strings"
	"unicode"
	"unicode/utf8"
)

// Defaults for Limits, and the fixed bound on key length.
const (
	DefaultMaxDepth   = 8      // levels; roots are level 0, so the deepest Depth is 7
	DefaultMaxNodes   = 10_000 // labels in one taxonomy
	DefaultMaxLineLen = 1024   // bytes per line, without the line end
	DefaultMaxErrors  = 20     // problems reported before parsing stops
	MaxKeyLen         = 64     // bytes per key
)

// Limits bounds what Parse, New and UnmarshalJSON accept. A zero field means
// the default for it.
type Limits struct {
	MaxDepth   int
	MaxNodes   int
	MaxLineLen int
	MaxErrors  int
}

// DefaultLimits returns the limits used by Parse, New and UnmarshalJSON.
func DefaultLimits() Limits {
	return Limits{MaxDepth: DefaultMaxDepth, MaxNodes: DefaultMaxNodes, MaxLineLen: DefaultMaxLineLen, MaxErrors: DefaultMaxErrors}
}

func (l Limits) orDefaults() Limits {
	d := DefaultLimits()
	if l.MaxDepth <= 0 {
		l.MaxDepth = d.MaxDepth
	}
	if l.MaxNodes <= 0 {
		l.MaxNodes = d.MaxNodes
	}
	if l.MaxLineLen <= 0 {
		l.MaxLineLen = d.MaxLineLen
	}
	if l.MaxErrors <= 0 {
		l.MaxErrors = d.MaxErrors
	}
	return l
}

// Node is one label in a Taxonomy. Indices refer to the taxonomy's pre-order
// numbering.
type Node struct {
	Key         string
	Name        string // display name; equal to Key unless set
	Description string // may be empty
	Parent      int    // -1 for a root
	Children    []int  // in file order
	Depth       int    // 0 for a root
	Position    int    // 0-based order among its siblings (roots count as siblings)
}

// Label is a label with its subtree, the shape used to build a Taxonomy in
// code and the shape of the JSON form. An empty Name means the key.
type Label struct {
	Key         string
	Name        string
	Description string
	Children    []Label
}

// Taxonomy is a validated, immutable label tree.
type Taxonomy struct {
	nodes []Node
	end   []int // end[i] is one past the last descendant of i
	roots []int
	index map[string]int
}

// New builds a taxonomy from nested labels under the default limits.
func New(roots []Label) (*Taxonomy, error) {
	return DefaultLimits().New(roots)
}

// New builds a taxonomy from nested labels under l. Problems are reported as
// an ErrorList whose entries name each bad label by its position, e.g.
// "[0].children[2]".
func (l Limits) New(roots []Label) (*Taxonomy, error) {
	b := newBuilder(l, "")
	walkLabels(b, roots, func(lab Label) (entry, []Label) {
		return entry{key: lab.Key, name: lab.Name, nameSet: lab.Name != "", desc: lab.Description}, lab.Children
	})
	return b.finish()
}

// walkLabels feeds a nested tree to b in pre-order, naming each label by its
// position, e.g. "[0].children[2]".
func walkLabels[T any](b *builder, ls []T, split func(T) (entry, []T)) {
	var walk func(ls []T, depth int, path string) bool
	walk = func(ls []T, depth int, path string) bool {
		for i, l := range ls {
			e, children := split(l)
			e.depth = depth
			e.at = where{label: path + "[" + strconv.Itoa(i) + "]"}
			if !b.add(e) || !walk(children, depth+1, e.at.label+".children") {
				return false
			}
		}
		return true
	}
	walk(ls, 0, "")
}

// Labels returns the tree as nested labels, with Name always filled in.
func (t *Taxonomy) Labels() []Label {
	return mapTree(t, t.roots, func(n *Node, children []Label) Label {
		return Label{Key: n.Key, Name: n.Name, Description: n.Description, Children: children}
	})
}

// mapTree builds a nested form of the subtrees under ids, bottom up; it gives
// nil for no ids so empty children vanish from JSON.
func mapTree[T any](t *Taxonomy, ids []int, f func(n *Node, children []T) T) []T {
	if len(ids) == 0 {
		return nil
	}
	out := make([]T, len(ids))
	for i, id := range ids {
		n := &t.nodes[id]
		out[i] = f(n, mapTree(t, n.Children, f))
	}
	return out
}

// Equal reports whether t and u hold the same labels in the same tree shape
// and order.
func (t *Taxonomy) Equal(u *Taxonomy) bool {
	return slices.EqualFunc(t.nodes, u.nodes, func(a, b Node) bool {
		return a.Key == b.Key && a.Name == b.Name && a.Description == b.Description &&
			a.Parent == b.Parent && a.Depth == b.Depth && a.Position == b.Position &&
			slices.Equal(a.Children, b.Children)
	})
}

// entry is one label as a reader found it, before validation.
type entry struct {
	key, name, desc string
	nameSet         bool // a name was written; an empty written name is an error
	depth           int
	at              where
}

// builder validates entries one at a time, in pre-order, so that errors come
// out in input order and a reader can stop early.
type builder struct {
	lim     Limits
	errs    collector
	t       *Taxonomy
	stack   []int          // stack[d] is the latest node at depth d
	first   map[string]int // key to its first place in places
	places  []where        // where each valid key was first seen
	stopped bool
}

func newBuilder(l Limits, file string) *builder {
	l = l.orDefaults()
	return &builder{
		lim:   l,
		errs:  collector{file: file, max: l.MaxErrors},
		t:     &Taxonomy{},
		first: map[string]int{},
	}
}

// add validates e and appends it to the tree; it reports false when the
// reader should stop (too many labels or too many errors).
func (b *builder) add(e entry) bool {
	if b.stopped {
		return false
	}
	if len(b.t.nodes) >= b.lim.MaxNodes {
		b.errs.add(e.at, 0, FieldFile, "too many labels: the limit is %d", b.lim.MaxNodes)
		b.stopped = true
		return false
	}
	ok := b.check(e)
	if b.errs.full {
		b.stopped = true
		return false
	}
	if !ok {
		return true
	}
	// A reader that already reported bad indentation may hand over a depth
	// below a skipped parent; attach to the nearest level that exists.
	depth := min(e.depth, len(b.stack))
	id := len(b.t.nodes)
	n := Node{Key: e.key, Name: e.name, Description: e.desc, Parent: -1, Depth: depth}
	if !e.nameSet {
		n.Name = e.key
	}
	if depth == 0 {
		n.Position = len(b.t.roots)
		b.t.roots = append(b.t.roots, id)
	} else {
		p := b.stack[depth-1]
		n.Parent = p
		n.Position = len(b.t.nodes[p].Children)
		b.t.nodes[p].Children = append(b.t.nodes[p].Children, id)
	}
	b.t.nodes = append(b.t.nodes, n)
	b.stack = append(b.stack[:depth], id)
	return true
}

// check reports every problem with e and whether e may enter the tree.
func (b *builder) check(e entry) bool {
	ok := true
	fail := func(col int, field, format string, args ...any) {
		ok = false
		b.errs.add(e.at, col, field, format, args...)
	}
	if col, msg := checkKey(e.key); msg != "" {
		fail(e.at.keyCol+col, FieldKey, "%s", msg)
	} else if first, dup := b.first[e.key]; dup {
		fail(e.at.keyCol, FieldKey, "duplicate key %q (first on %s)", e.key, b.places[first].describe())
	} else {
		b.first[e.key] = len(b.places)
		b.places = append(b.places, e.at)
	}
	if e.nameSet && e.name == "" {
		fail(e.at.nameCol, FieldName, "empty name; leave out the '|' to use the key as the name")
	} else if col, msg := checkText(e.name); msg != "" {
		fail(e.at.nameCol+col, FieldName, "name %s", msg)
	}
	if col, msg := checkText(e.desc); msg != "" {
		fail(e.at.descCol+col, FieldDescription, "description %s", msg)
	}
	if e.depth >= b.lim.MaxDepth {
		fail(e.at.keyCol, FieldIndent, "too deep: %q is on level %d, the limit is %d levels", e.key, e.depth+1, b.lim.MaxDepth)
	}
	if ok {
		name := e.name
		if !e.nameSet {
			name = e.key
		}
		if n := formattedLen(e.key, name, e.desc, e.depth); n > b.lim.MaxLineLen {
			fail(0, FieldLine, "label %q is %d bytes long as Format writes it, over the limit of %d", e.key, n, b.lim.MaxLineLen)
		}
	}
	return ok
}

func (b *builder) finish() (*Taxonomy, error) {
	if len(b.errs.list) == 0 && len(b.t.nodes) == 0 {
		b.errs.add(where{}, 0, FieldFile, "empty taxonomy: no labels")
	}
	if err := b.errs.err(); err != nil {
		return nil, err
	}
	t := b.t
	// Without errors every valid key became a node, in order, so the first
	// places are the node indices.
	t.index = b.first
	t.end = make([]int, len(t.nodes))
	for i := len(t.nodes) - 1; i >= 0; i-- {
		t.end[i] = i + 1
		if c := t.nodes[i].Children; len(c) > 0 {
			t.end[i] = t.end[c[len(c)-1]]
		}
	}
	return t, nil
}

// checkKey returns a message when key is not a valid key, with the 0-based
// column of the offending character.
func checkKey(key string) (int, string) {
	if key == "" {
		return 0, "empty key"
	}
	if len(key) > MaxKeyLen {
		return MaxKeyLen, "key " + strconv.Quote(key) + " is " + strconv.Itoa(len(key)) + " bytes long, the limit is " + strconv.Itoa(MaxKeyLen)
	}
	for i, r := range key {
		if !keyChar(r) {
			msg := "key " + strconv.Quote(key) + " has invalid character " + strconv.QuoteRune(r) + "; keys use a-z, 0-9, '-', '_' and '.'"
			if r == ' ' || r == '\t' {
				msg += " (is a '|' missing before the display name?)"
			}
			return utf8.RuneCountInString(key[:i]), msg
		}
		if i == 0 && (r == '-' || r == '_' || r == '.') {
			return 0, "key " + strconv.Quote(key) + " must start with a letter or digit"
		}
	}
	return 0, ""
}

func keyChar(r rune) bool {
	return r >= 'a' && r <= 'z' || r >= '0' && r <= '9' || r == '-' || r == '_' || r == '.'
}

// checkText returns a message when s cannot be a name or description, with
// the 0-based column of the offending character.
func checkText(s string) (int, string) {
	if !utf8.ValidString(s) {
		i := 0
		for i < len(s) {
			r, size := utf8.DecodeRuneInString(s[i:])
			if r == utf8.RuneError && size <= 1 {
				break
			}
			i += size
		}
		return utf8.RuneCountInString(s[:i]), "is not valid UTF-8"
	}
	for i, r := range s {
		if unicode.IsControl(r) {
			return utf8.RuneCountInString(s[:i]), "holds control character " + strconv.QuoteRune(r)
		}
	}
	if s != strings.TrimSpace(s) {
		return 0, "has leading or trailing white space"
	}
	return 0, ""
}
