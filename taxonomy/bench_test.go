package taxonomy

import (
	"encoding/json"
	"fmt"
	"strings"
	"testing"
)

// bigTaxonomyText builds a three-level taxonomy of exactly DefaultMaxNodes
// labels: 16 roots, 24 children each, 25 leaves under each child.
func bigTaxonomyText() string {
	var b strings.Builder
	for r := range 16 {
		fmt.Fprintf(&b, "stream-%d | Stream %d | everything sorted to line %d\n", r, r, r)
		for c := range 24 {
			fmt.Fprintf(&b, "  kind-%d-%d | Kind %d.%d\n", r, c, r, c)
			for l := range 25 {
				fmt.Fprintf(&b, "    item-%d-%d-%d | Item %d.%d.%d | what it looks like on the belt\n", r, c, l, r, c, l)
			}
		}
	}
	return b.String()
}

func TestBigTaxonomyIsAtTheLimit(t *testing.T) {
	tx, err := ParseString(bigTaxonomyText())
	if err != nil {
		t.Fatal(err)
	}
	if tx.Len() != DefaultMaxNodes {
		t.Fatalf("Len = %d, want %d", tx.Len(), DefaultMaxNodes)
	}
	if _, err := ParseString(bigTaxonomyText() + "one-more\n"); err == nil || !strings.Contains(err.Error(), "line 10001: too many labels") {
		t.Fatalf("one label over the limit: err = %v", err)
	}
}

func BenchmarkParse10k(b *testing.B) {
	text := bigTaxonomyText()
	b.SetBytes(int64(len(text)))
	b.ReportAllocs()
	for b.Loop() {
		if _, err := ParseString(text); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkFormat10k(b *testing.B) {
	tx, err := ParseString(bigTaxonomyText())
	if err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	for b.Loop() {
		_ = tx.String()
	}
}

func BenchmarkUnmarshalJSON10k(b *testing.B) {
	tx, err := ParseString(bigTaxonomyText())
	if err != nil {
		b.Fatal(err)
	}
	data, err := json.Marshal(tx)
	if err != nil {
		b.Fatal(err)
	}
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	for b.Loop() {
		if _, err := DefaultLimits().ParseJSON(data); err != nil {
			b.Fatal(err)
		}
	}
}
