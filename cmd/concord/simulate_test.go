package main

import (
	"bytes"
	"context"
	"encoding/json"
	"encoding/xml"
	"errors"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/concord-labs/concord/agreement"
)

// smallCrowd has ten labellers, enough for seven-vote panels without anyone
// voting twice on an item, and is quick to simulate.
var smallCrowd = []string{"--items", "300", "--crowd", "careful:2,average:4,sloppy:2,random:1,biased:1", "--seed", "3"}

func runSimulateCmd(t *testing.T, args ...string) (string, error) {
	t.Helper()
	var out, errOut bytes.Buffer
	err := run(context.Background(), &env{stdout: &out, stderr: &errOut}, append([]string{"simulate"}, args...))
	return out.String(), err
}

func TestSimulateJSON(t *testing.T) {
	svg := filepath.Join(t.TempDir(), "curve.svg")
	out, err := runSimulateCmd(t, append(smallCrowd, "--json", "--rate", "0.05", "--svg", svg)...)
	if err != nil {
		t.Fatal(err)
	}
	rep, byName := decodeSimReport(t, out)
	want := []string{"majority-3", "majority-5", "majority-7", "dawid-skene-3", "dawid-skene-5", "dawid-skene-7",
		"adaptive-0.9", "adaptive-0.95", "adaptive-0.97", "adaptive-0.98", "adaptive-0.99", "adaptive-0.995"}
	if len(rep.Policies) != len(want) {
		t.Errorf("%d policies, want %d", len(rep.Policies), len(want))
	}
	for _, name := range want {
		p, ok := byName[name]
		if !ok {
			t.Errorf("policy %s missing", name)
			continue
		}
		if p.Items != 300 || p.Accuracy < 0 || p.Accuracy > 1 || p.Accuracy != float64(p.Correct)/300 {
			t.Errorf("%s: %d of %d right, accuracy %v", name, p.Correct, p.Items, p.Accuracy)
		}
		if !(p.AccuracyLow <= p.Accuracy && p.Accuracy <= p.AccuracyHigh) {
			t.Errorf("%s: accuracy %v outside its interval [%v, %v]", name, p.Accuracy, p.AccuracyLow, p.AccuracyHigh)
		}
		if math.Abs(p.Cost-0.05*float64(p.Votes)) > 1e-9 || p.VotesPerItem != float64(p.Votes)/300 {
			t.Errorf("%s: %d votes, %v per item, cost %v", name, p.Votes, p.VotesPerItem, p.Cost)
		}
	}
	for _, k := range []int{3, 5, 7} {
		for _, m := range []string{"majority", "dawid-skene"} {
			p := byName[m+"-"+strconv.Itoa(k)]
			if p.VotesPerItem != float64(k) || p.Votes != 300*k {
				t.Errorf("%s: %v votes per item (%d votes), want exactly %d", p.Name, p.VotesPerItem, p.Votes, k)
			}
		}
	}
	for _, name := range want[6:] {
		p := byName[name]
		if p.VotesPerItem < 2 || p.Votes >= byName["majority-7"].Votes || p.Rounds < 1 {
			t.Errorf("%s: %v votes per item in %d rounds; want between min votes 2 and fixed 7", name, p.VotesPerItem, p.Rounds)
		}
	}
	// More votes must help majority vote on any sane crowd; this fails if
	// panels repeat labellers or votes ignore the truth.
	if byName["majority-7"].Accuracy <= byName["majority-3"].Accuracy || byName["majority-3"].Accuracy < 0.5 {
		t.Errorf("majority-3 %v, majority-7 %v", byName["majority-3"].Accuracy, byName["majority-7"].Accuracy)
	}
	if rep.Check.Baseline != "majority-5" || rep.Check.BaselineAccuracy != byName["majority-5"].Accuracy {
		t.Errorf("check %+v", rep.Check)
	}
	// On this crowd adaptive-0.99 matches majority-5, so a check that finds
	// none fails here as well as one that names the wrong row.
	checkBackedByRows(t, rep, byName)

	again, err := runSimulateCmd(t, append(smallCrowd, "--json", "--rate", "0.05")...)
	if err != nil || again != out {
		t.Errorf("same seed, different output (err %v)", err)
	}

	checkSVG(t, svg)
}

// decodeSimReport reads simulate's --json output and indexes its rows by
// policy name.
func decodeSimReport(t *testing.T, out string) (simReport, map[string]policyResult) {
	t.Helper()
	var rep simReport
	if err := json.Unmarshal([]byte(out), &rep); err != nil {
		t.Fatalf("output is not JSON: %v\n%s", err, out)
	}
	byName := map[string]policyResult{}
	for _, p := range rep.Policies {
		byName[p.Name] = p
	}
	return rep, byName
}

// checkBackedByRows finds, from the rows alone, the adaptive policy with
// the fewest votes that gets at least as many items right as majority-5;
// it requires one and that the report's check names it with its vote share.
func checkBackedByRows(t *testing.T, rep simReport, byName map[string]policyResult) policyResult {
	t.Helper()
	base := byName["majority-5"]
	var best policyResult
	found := false
	for _, p := range rep.Policies {
		if p.Adaptive && p.Correct >= base.Correct && (!found || p.Votes < best.Votes) {
			best, found = p, true
		}
	}
	if !found {
		t.Fatalf("no adaptive policy gets as many items right as majority-5 (%d)", base.Correct)
	}
	share := float64(best.Votes) / float64(base.Votes)
	if c := rep.Check; c.Policy != best.Name || c.VoteShare != share || c.Accuracy != best.Accuracy {
		t.Errorf("check %+v; the rows say %s with %v of majority-5's votes", c, best.Name, share)
	}
	return best
}

// TestSimulateDefaultCrowd holds the simulation to its promise on the
// defaults (2000 items, the default crowd, seed 1): some adaptive
// Dawid-Skene policy is as accurate as fixed five-vote majority on at most
// 60% of its votes.
func TestSimulateDefaultCrowd(t *testing.T) {
	if testing.Short() {
		t.Skip("simulates 2000 items, a few seconds")
	}
	out, err := runSimulateCmd(t, "--json")
	if err != nil {
		t.Fatal(err)
	}
	rep, byName := decodeSimReport(t, out)
	if rep.Crowd != agreement.DefaultCrowdSpec || rep.Items != 2000 || byName["majority-5"].Votes != 5*2000 {
		t.Fatalf("crowd %q, %d items, majority-5 %d votes; want the defaults", rep.Crowd, rep.Items, byName["majority-5"].Votes)
	}
	best := checkBackedByRows(t, rep, byName)
	if best.Method != "dawid-skene" {
		t.Errorf("%s: method %q, want dawid-skene", best.Name, best.Method)
	}
	// At most 60% of majority-5's 10,000 votes is 6,000.
	if best.Votes > 6000 {
		t.Errorf("%s matches majority-5 with %d votes, more than 60%% of 10000", best.Name, best.Votes)
	}
}

// checkSVG parses the chart as XML and looks for its title, both axis
// labels and one curve per family.
func checkSVG(t *testing.T, path string) {
	t.Helper()
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	dec := xml.NewDecoder(bytes.NewReader(data))
	var texts []string
	lines := 0
	for {
		tok, err := dec.Token()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			t.Fatalf("chart is not well-formed XML: %v", err)
		}
		switch tok := tok.(type) {
		case xml.StartElement:
			if tok.Name.Local == "polyline" {
				lines++
			}
		case xml.CharData:
			texts = append(texts, string(tok))
		}
	}
	all := strings.Join(texts, "|")
	for _, w := range []string{"Accuracy against votes per item", "votes per item (votes)", "accuracy against the simulated truth (%)", "majority-5"} {
		if !strings.Contains(all, w) {
			t.Errorf("chart lacks %q", w)
		}
	}
	if lines != len(chartSeries) {
		t.Errorf("%d curves, want %d", lines, len(chartSeries))
	}
}

func TestSimulateTable(t *testing.T) {
	out, err := runSimulateCmd(t, append(smallCrowd, "--targets", "0.95", "--currency", "GBP")...)
	if err != nil {
		t.Fatal(err)
	}
	for _, w := range []string{"majority-3", "dawid-skene-7", "adaptive-0.95", "cost (GBP)", "seeded coin", "minimum wage"} {
		if !strings.Contains(out, w) {
			t.Errorf("table lacks %q:\n%s", w, out)
		}
	}
}

func TestSimulateBadInput(t *testing.T) {
	for _, tc := range []struct {
		args []string
		want []string
	}{
		{[]string{"--crowd", "careful:4,avrage:5,sloppy:2"}, []string{"--crowd", "field 2", `"avrage:5"`, `unknown kind "avrage"`}},
		{[]string{"--crowd", "careful:4,sloppy:two"}, []string{"field 2", `count "two"`}},
		{[]string{"--crowd", "careful:3,average:2"}, []string{"5 labellers", "needs 7"}},
		{[]string{"--targets", "0.9,1.5"}, []string{"--targets entry 2", `"1.5"`}},
		{[]string{"--items", "0"}, []string{"--items 0"}},
		{[]string{"--min-votes", "4", "--max-votes", "3"}, []string{"--max-votes 3", "--min-votes 4"}},
	} {
		_, err := runSimulateCmd(t, tc.args...)
		var ue usageError
		if !errors.As(err, &ue) {
			t.Errorf("%v: got %v, want a usage error", tc.args, err)
			continue
		}
		for _, w := range tc.want {
			if !strings.Contains(err.Error(), w) {
				t.Errorf("%v: error %q lacks %q", tc.args, err, w)
			}
		}
	}
}

// BenchmarkSimulateDefault times `concord simulate` on its defaults (2000
// items, 10 classes, the default crowd, four adaptive targets).
func BenchmarkSimulateDefault(b *testing.B) {
	e := &env{stdout: io.Discard, stderr: io.Discard}
	for b.Loop() {
		if err := run(context.Background(), e, []string{"simulate", "--json"}); err != nil {
			b.Fatal(err)
		}
	}
}
