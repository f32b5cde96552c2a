package dataset_test

import (
	"math"
	"strconv"
	"testing"

	"github.com/concord-labs/concord/dataset"
)

// TestGroupSplitIsPinned holds GroupSplit to values computed once: the
// function is part of the release format, and a change would move items of
// existing projects between splits.
func TestGroupSplitIsPinned(t *testing.T) {
	got := ""
	for g := int64(1); g <= 40; g++ {
		got += strconv.Itoa(int(dataset.GroupSplit(42, g, dataset.DefaultFractions)))
	}
	// 0 train, 1 validation, 2 test; computed by this code on 2026-12-01.
	if want := "0000000000000000000000200000002000201000"; got != want {
		t.Fatalf("GroupSplit(42, 1..40) = %s, want %s", got, want)
	}
}

func TestAssignSplitsKeepsGroupsTogether(t *testing.T) {
	// Items 1-3 are near-duplicates (cluster 1), 3 and 4 share a manifest
	// group, so 1-4 are one group; 5 is alone.
	items := []dataset.GroupItem{
		{ID: 1, ClusterID: 1}, {ID: 2, ClusterID: 1}, {ID: 3, ClusterID: 1, GroupKey: "bin-4"},
		{ID: 4, ClusterID: 4, GroupKey: "bin-4"}, {ID: 5, ClusterID: 5},
	}
	for seed := int64(0); seed < 50; seed++ {
		splits, groups := dataset.AssignSplits(items, seed, dataset.Fractions{34, 33, 33}, nil)
		for i := 1; i < 4; i++ {
			if splits[i] != splits[0] || groups[i] != 1 {
				t.Fatalf("seed %d: item %d in %v/group %d, item 1 in %v/group 1", seed, i+1, splits[i], groups[i], splits[0])
			}
		}
		if groups[4] != 5 || splits[4] != dataset.GroupSplit(seed, 5, dataset.Fractions{34, 33, 33}) {
			t.Fatalf("seed %d: lone item 5 in group %d, split %v", seed, groups[4], splits[4])
		}
	}
}

// TestAssignSplitsBridgeNeverMovesTestToTrain: a new item that joins a
// train group and a test group into one sends the merged group to test.
func TestAssignSplitsBridgeNeverMovesTestToTrain(t *testing.T) {
	f := dataset.DefaultFractions
	var trainID, testID int64
	for id := int64(1); trainID == 0 || testID == 0; id++ {
		switch dataset.GroupSplit(7, id, f) {
		case dataset.Train:
			if trainID == 0 {
				trainID = id
			}
		case dataset.Test:
			if testID == 0 {
				testID = id
			}
		}
	}
	old := []dataset.GroupItem{{ID: trainID, ClusterID: trainID}, {ID: testID, ClusterID: testID}}
	before, _ := dataset.AssignSplits(old, 7, f, nil)
	pins := map[int64]dataset.Split{trainID: before[0], testID: before[1]}
	// The bridge shares trainID's cluster and testID's manifest group.
	grown := []dataset.GroupItem{{ID: trainID, ClusterID: trainID}, {ID: testID, ClusterID: testID, GroupKey: "g"},
		{ID: 1000, ClusterID: trainID, GroupKey: "g"}}
	after, groups := dataset.AssignSplits(grown, 7, f, pins)
	for i, s := range after {
		if s != dataset.Test || groups[i] != min(trainID, testID) {
			t.Errorf("item %d: %v in group %d after the merge, want test in group %d", grown[i].ID, s, groups[i], min(trainID, testID))
		}
	}
	// Without the earlier release, the merged group would follow its key.
	plain, _ := dataset.AssignSplits(grown, 7, f, nil)
	if plain[0] != dataset.GroupSplit(7, min(trainID, testID), f) {
		t.Errorf("unpinned merged group in %v", plain[0])
	}
}

// TestSplitSharesWithinBound checks the documented bound: with 80/10/10 and
// a label spread over at least 1,000 groups (of 1 to 3 items), each split's
// share of the label's items is within 5 percentage points of the target.
// A pure hash gives binomial shares: the standard deviation of the train
// share is sqrt(0.8*0.2/1000) = 1.3 points, so 5 points is about 4 of them.
func TestSplitSharesWithinBound(t *testing.T) {
	f := dataset.DefaultFractions
	for seed := int64(1); seed <= 20; seed++ {
		var items []dataset.GroupItem
		label := map[int64]int{}
		id := int64(1)
		for g := range 5 * 1000 {
			first := id
			for range 1 + g%3 {
				items = append(items, dataset.GroupItem{ID: id, ClusterID: first})
				label[id] = g % 5
				id++
			}
		}
		splits, _ := dataset.AssignSplits(items, seed, f, nil)
		var n [5][3]int
		for i, it := range items {
			n[label[it.ID]][splits[i]]++
		}
		for l := range n {
			total := n[l][0] + n[l][1] + n[l][2]
			for s := range 3 {
				share := 100 * float64(n[l][s]) / float64(total)
				if math.Abs(share-float64(f[s])) > 5 {
					t.Errorf("seed %d label %d split %v: share %.1f%%, target %d%%", seed, l, dataset.Split(s), share, f[s])
				}
			}
		}
	}
}

func TestParseFractionsAndLevel(t *testing.T) {
	if f, err := dataset.ParseFractions("70/20/10"); err != nil || f != (dataset.Fractions{70, 20, 10}) {
		t.Errorf("ParseFractions(70/20/10) = %v, %v", f, err)
	}
	for _, bad := range []string{"80/10", "80/10/20", "a/b/c", "-10/100/10"} {
		if _, err := dataset.ParseFractions(bad); err == nil {
			t.Errorf("ParseFractions(%q) accepted", bad)
		}
	}
	if l, err := dataset.ParseLevel("leaf"); err != nil || l != dataset.LevelLeaf {
		t.Errorf("ParseLevel(leaf) = %d, %v", l, err)
	}
	if l, err := dataset.ParseLevel("1"); err != nil || l != 1 {
		t.Errorf("ParseLevel(1) = %d, %v", l, err)
	}
	for _, bad := range []string{"-1", "x", "1.5", "01"} {
		if _, err := dataset.ParseLevel(bad); err == nil {
			t.Errorf("ParseLevel(%q) accepted", bad)
		}
	}
}
