package taxonomy

import (
	"testing"

	"github.com/google/go-cmp/cmp"
)

func loadRecycling(t *testing.T) *Taxonomy {
	t.Helper()
	tx, err := ParseFile("../testdata/taxonomy/recycling.txt")
	if err != nil {
		t.Fatal(err)
	}
	return tx
}

// id looks a key up and fails the test when it is missing.
func id(t *testing.T, tx *Taxonomy, key string) int {
	t.Helper()
	i, ok := tx.Lookup(key)
	if !ok {
		t.Fatalf("key %q not found", key)
	}
	return i
}

func keysOf(tx *Taxonomy, ids []int) []string {
	out := []string{}
	for _, i := range ids {
		out = append(out, tx.Key(i))
	}
	return out
}

func TestRecyclingShape(t *testing.T) {
	tx := loadRecycling(t)
	if got := tx.Len(); got != 20 {
		t.Errorf("Len = %d, want 20", got)
	}
	wantParents := []int{-1, 0, 1, 1, 1, 1, 0, 6, 6, 6, 0, 10, 10, 10, 10, 0, 15, 15, 15, -1}
	if diff := cmp.Diff(wantParents, tx.Parents()); diff != "" {
		t.Errorf("Parents (-want +got):\n%s", diff)
	}
	if diff := cmp.Diff([]string{"material", "residual-waste"}, keysOf(tx, tx.Roots())); diff != "" {
		t.Errorf("Roots (-want +got):\n%s", diff)
	}
	wantLeaves := []string{
		"pet-bottle", "hdpe-container", "plastic-film", "polystyrene",
		"aluminium-can", "steel-can", "aerosol-can",
		"cardboard", "newspaper", "office-paper", "paper-cup",
		"clear-glass", "green-glass", "brown-glass",
		"residual-waste",
	}
	if diff := cmp.Diff(wantLeaves, keysOf(tx, tx.Leaves())); diff != "" {
		t.Errorf("Leaves (-want +got):\n%s", diff)
	}
	want := Node{Key: "steel-can", Name: "Steel can", Description: "heavier food tin with ridged sides, often with a paper label",
		Parent: 6, Depth: 2, Position: 1}
	if diff := cmp.Diff(want, tx.Node(id(t, tx, "steel-can"))); diff != "" {
		t.Errorf("Node(steel-can) (-want +got):\n%s", diff)
	}
	if got := tx.Node(id(t, tx, "residual-waste")).Position; got != 1 {
		t.Errorf("Position of residual-waste among roots = %d, want 1", got)
	}
}

func TestQueries(t *testing.T) {
	tx := loadRecycling(t)
	k := func(key string) int { return id(t, tx, key) }

	if _, ok := tx.Lookup("wood"); ok {
		t.Error(`Lookup("wood") found a label`)
	}
	if diff := cmp.Diff([]string{"aluminium-can", "steel-can", "aerosol-can"}, keysOf(tx, tx.Children(k("metal")))); diff != "" {
		t.Errorf("Children(metal) (-want +got):\n%s", diff)
	}
	if diff := cmp.Diff([]string{"material", "plastic"}, keysOf(tx, tx.Ancestors(k("pet-bottle")))); diff != "" {
		t.Errorf("Ancestors(pet-bottle) (-want +got):\n%s", diff)
	}
	if got := tx.Ancestors(k("residual-waste")); len(got) != 0 {
		t.Errorf("Ancestors(residual-waste) = %v, want none", got)
	}
	if diff := cmp.Diff([]string{"material", "glass", "green-glass"}, tx.Path(k("green-glass"))); diff != "" {
		t.Errorf("Path(green-glass) (-want +got):\n%s", diff)
	}
	if diff := cmp.Diff([]string{"clear-glass", "green-glass", "brown-glass"}, keysOf(tx, tx.Descendants(k("glass")))); diff != "" {
		t.Errorf("Descendants(glass) (-want +got):\n%s", diff)
	}
	if got := len(tx.Descendants(k("material"))); got != 18 {
		t.Errorf("len(Descendants(material)) = %d, want 18", got)
	}
	if got := tx.Descendants(k("cardboard")); len(got) != 0 {
		t.Errorf("Descendants(cardboard) = %v, want none", got)
	}
	for key, want := range map[string]int{"material": 0, "paper": 1, "paper-cup": 2, "residual-waste": 0} {
		if got := tx.Depth(k(key)); got != want {
			t.Errorf("Depth(%s) = %d, want %d", key, got, want)
		}
	}
	if !tx.IsAncestor(k("material"), k("brown-glass")) || tx.IsAncestor(k("plastic"), k("brown-glass")) || tx.IsAncestor(k("glass"), k("glass")) {
		t.Error("IsAncestor wrong for material/plastic/glass over brown-glass")
	}

	lca := []struct {
		a, b string
		want string // "" means none
	}{
		{"pet-bottle", "polystyrene", "plastic"},
		{"pet-bottle", "cardboard", "material"},
		{"glass", "green-glass", "glass"},
		{"steel-can", "steel-can", "steel-can"},
		{"metal", "material", "material"},
		{"pet-bottle", "residual-waste", ""},
	}
	for _, c := range lca {
		got, ok := tx.LowestCommonAncestor(k(c.a), k(c.b))
		gotKey := ""
		if ok {
			gotKey = tx.Key(got)
		}
		if gotKey != c.want || (!ok && got != -1) {
			t.Errorf("LowestCommonAncestor(%s, %s) = %d %q, want %q", c.a, c.b, got, gotKey, c.want)
		}
	}

	atDepth := []struct {
		key  string
		n    int
		want string // "" means none
	}{
		{"aluminium-can", 0, "material"},
		{"aluminium-can", 1, "metal"},
		{"aluminium-can", 2, "aluminium-can"},
		{"aluminium-can", 3, ""},
		{"aluminium-can", -1, ""},
		{"residual-waste", 0, "residual-waste"},
	}
	for _, c := range atDepth {
		got, ok := tx.AtDepth(k(c.key), c.n)
		gotKey := ""
		if ok {
			gotKey = tx.Key(got)
		}
		if gotKey != c.want {
			t.Errorf("AtDepth(%s, %d) = %q, want %q", c.key, c.n, gotKey, c.want)
		}
	}
}

// TestQueriesReturnCopies guards the tree against callers that edit the
// slices they are given.
func TestQueriesReturnCopies(t *testing.T) {
	tx := loadRecycling(t)
	metal := id(t, tx, "metal")
	tx.Children(metal)[0] = 99
	tx.Node(metal).Children[0] = 99
	tx.Roots()[0] = 99
	if got := tx.Children(metal)[0]; got != 7 {
		t.Errorf("Children(metal)[0] = %d after editing a returned copy, want 7", got)
	}
	if got := tx.Roots()[0]; got != 0 {
		t.Errorf("Roots()[0] = %d after editing a returned copy, want 0", got)
	}
}
