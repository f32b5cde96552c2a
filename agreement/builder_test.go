package agreement

import (
	"errors"
	"slices"
	"testing"
)

func TestBuilderDuplicateKeepsLaterVote(t *testing.T) {
	b := NewBuilder()
	add := func(item, labeller, label string, sec float64, wantDup bool) {
		t.Helper()
		dup, err := b.Add(item, labeller, label, sec)
		if err != nil || dup != wantDup {
			t.Fatalf("Add(%s,%s,%s): dup %v err %v, want dup %v", item, labeller, label, dup, err, wantDup)
		}
	}
	add("img-001", "ana", "pet-bottle", 2.5, false)
	add("img-001", "ben", "aluminium-can", 1.0, false)
	add("img-002", "ana", "cardboard", 3.0, false)
	add("img-001", "ana", "aluminium-can", 4.0, true)
	v := b.Build()
	if err := v.Validate(); err != nil {
		t.Fatal(err)
	}
	if v.Len() != 3 || v.NumItems != 2 || v.NumLabellers != 2 || v.NumClasses != 3 {
		t.Fatalf("built %d votes, %d items, %d labellers, %d classes", v.Len(), v.NumItems, v.NumLabellers, v.NumClasses)
	}
	can, _ := b.ClassID("aluminium-can")
	if v.Label[0] != int32(can) || v.Seconds[0] != 4.0 {
		t.Errorf("first vote now label %d seconds %v, want %d and 4", v.Label[0], v.Seconds[0], can)
	}
	if got := b.ClassNames(); !slices.Equal(got, []string{"pet-bottle", "aluminium-can", "cardboard"}) {
		t.Errorf("class names %v", got)
	}
	b.Add("img-003", "cleo", "glass", -1)
	if v.Len() != 3 {
		t.Error("a built Votes changed after a later Add")
	}
}

func TestBuilderWithClasses(t *testing.T) {
	classes := []string{"glass", "paper", "plastic"}
	b, err := NewBuilderWithClasses(classes)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := b.Add("img-001", "ana", "plastic", 1); err != nil {
		t.Fatal(err)
	}
	if _, err := b.Add("img-001", "ben", "wood", 1); !errors.Is(err, ErrUnknownClass) {
		t.Errorf("unknown label: err %v, want ErrUnknownClass", err)
	}
	v := b.Build()
	if v.NumClasses != 3 || v.Label[0] != 2 {
		t.Errorf("classes %d, label %d; want 3 and 2 (the fixed order)", v.NumClasses, v.Label[0])
	}
	if _, err := NewBuilderWithClasses([]string{"glass", "glass"}); err == nil {
		t.Error("repeated class accepted")
	}
	if _, err := b.Add("", "ana", "glass", 1); err == nil {
		t.Error("empty item name accepted")
	}
}
