package agreement

import (
	"math"
	"testing"
)

// The sorting line's tree: 0 material > 1 plastic > 2 PET bottle,
// 3 HDPE bottle; 0 > 4 metal > 5 aluminium can; 6 residual waste (a root).
var sortingParent = []int{-1, 0, 1, 1, 0, 4, -1}

func TestRollUpDisputedBottleType(t *testing.T) {
	h, err := NewHierarchy(sortingParent)
	if err != nil {
		t.Fatal(err)
	}
	cases := []struct {
		name      string
		post      []float64
		wantClass int
		wantMass  float64
	}{
		{"clear PET", []float64{0, 0, 0.96, 0.02, 0, 0.01, 0.01}, 2, 0.96},
		{"disputed bottle", []float64{0, 0.05, 0.50, 0.42, 0, 0.02, 0.01}, 1, 0.97},
		{"plastic or metal", []float64{0.1, 0.2, 0.3, 0.1, 0.1, 0.18, 0.02}, 0, 0.98},
		{"nothing sure", []float64{0.1, 0.1, 0.2, 0.1, 0.1, 0.1, 0.3}, -1, 0},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			c, m := h.RollUp(tc.post, 0.95)
			if c != tc.wantClass || math.Abs(m-tc.wantMass) > 1e-12 {
				t.Errorf("RollUp = %d, %.3f; want %d, %.3f", c, m, tc.wantClass, tc.wantMass)
			}
		})
	}
}

func TestHierarchyAtDepth(t *testing.T) {
	h, err := NewHierarchy(sortingParent)
	if err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct{ class, depth, want int }{
		{2, 0, 0}, {2, 1, 1}, {2, 2, 2}, {2, 5, 2}, {5, 1, 4}, {6, 2, 6},
	} {
		if got := h.AtDepth(tc.class, tc.depth); got != tc.want {
			t.Errorf("AtDepth(%d, %d) = %d, want %d", tc.class, tc.depth, got, tc.want)
		}
	}
	if h.Depth(3) != 2 || h.Depth(6) != 0 {
		t.Errorf("depths %d %d, want 2 0", h.Depth(3), h.Depth(6))
	}
}

func TestHierarchyRejectsCycles(t *testing.T) {
	if _, err := NewHierarchy([]int{-1, 2, 1}); err == nil {
		t.Error("cycle 1 -> 2 -> 1 accepted")
	}
	if _, err := NewHierarchy([]int{-1, 7}); err == nil {
		t.Error("parent 7 of 2 classes accepted")
	}
}
