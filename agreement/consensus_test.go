package agreement

import (
	"encoding/csv"
	"os"
	"path/filepath"
	"testing"
)

// refPath finds a reference file: the repository's copy under
// testdata/reference first, else the shared folder (override it with
// CONCORD_REFERENCE). A missing file fails the test rather than skipping
// it, so a green run always means the checks ran.
func refPath(name string) string {
	local := filepath.Join("..", "testdata", "reference", name)
	if _, err := os.Stat(local); err == nil {
		return local
	}
	if d := os.Getenv("CONCORD_REFERENCE"); d != "" {
		return filepath.Join(d, name)
	}
	return filepath.Join("/work/shared/reference", name)
}

// refRows reads a reference CSV and drops its header row.
func refRows(t testing.TB, name string) [][]string {
	t.Helper()
	f, err := os.Open(refPath(name))
	if err != nil {
		t.Fatalf("reference data: %v", err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatalf("reference data %s: %v", name, err)
	}
	return rows[1:]
}

func TestMajorityVoteReportsTies(t *testing.T) {
	// Item 0: 2 x class 1, 1 x class 0. Item 1: one vote each for 0 and 2,
	// given in both orders across items 1 and 2 so input order cannot win.
	v := &Votes{NumItems: 4, NumLabellers: 3, NumClasses: 3,
		Item:     []int32{0, 0, 0, 1, 1, 2, 2},
		Labeller: []int32{0, 1, 2, 0, 1, 0, 1},
		Label:    []int32{1, 1, 0, 0, 2, 2, 0},
	}
	m, err := MajorityVote(v)
	if err != nil {
		t.Fatal(err)
	}
	if m.Label[0] != 1 || m.Tied[0] || m.Confidence[0] != 2.0/3 {
		t.Errorf("item 0: label %d tied %v conf %v, want 1 false 2/3", m.Label[0], m.Tied[0], m.Confidence[0])
	}
	for _, item := range []int{1, 2} {
		got := m.TiedLabels(item)
		if m.Label[item] != -1 || !m.Tied[item] || len(got) != 2 || got[0] != 0 || got[1] != 2 {
			t.Errorf("item %d: label %d tied labels %v, want -1 [0 2]", item, m.Label[item], got)
		}
	}
	if m.Label[3] != -1 || m.Votes[3] != 0 || m.Tied[3] {
		t.Errorf("unvoted item: label %d votes %d tied %v", m.Label[3], m.Votes[3], m.Tied[3])
	}
	if p := m.PosteriorOf(3); p[0] != 1.0/3 {
		t.Errorf("unvoted item posterior %v, want uniform", p)
	}
}

func TestMajorityVoteRejectsBadIds(t *testing.T) {
	v := &Votes{NumItems: 1, NumLabellers: 1, NumClasses: 2,
		Item: []int32{0}, Labeller: []int32{0}, Label: []int32{2}}
	if _, err := MajorityVote(v); err == nil {
		t.Fatal("label 2 of 2 classes accepted")
	}
}
