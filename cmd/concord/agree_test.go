package main

import (
	"bufio"
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"slices"
	"strings"
	"testing"
	"unicode/utf8"

	"github.com/concord-labs/concord/agreement"
)

const agreeData = "../../testdata/agree/"
const crowdData = "../../testdata/reference/crowd/"

// agreeOut is the part of agree's JSON the tests read; pointers tell null
// from zero.
type agreeOut struct {
	Items              int                 `json:"items"`
	Labellers          int                 `json:"labellers"`
	Votes              int                 `json:"votes"`
	DuplicateVotes     int                 `json:"duplicate_votes"`
	Classes            []string            `json:"classes"`
	Method             string              `json:"method"`
	FleissKappa        *float64            `json:"fleiss_kappa"`
	FleissKappaByClass map[string]*float64 `json:"fleiss_kappa_by_class"`
	FleissBand         *bandJSON           `json:"fleiss_kappa_band"`
	KrippendorffAlpha  *float64            `json:"krippendorff_alpha"`
	Consensus          []struct {
		Item       string   `json:"item"`
		Label      *string  `json:"label"`
		Confidence *float64 `json:"confidence"`
		Votes      int      `json:"votes"`
		Status     string   `json:"status"`
		Tied       bool     `json:"tied"`
		TiedLabels []string `json:"tied_labels"`
		GoldFixed  bool     `json:"gold_fixed"`
	} `json:"consensus"`
	Queue []struct {
		Item      string `json:"item"`
		MoreVotes int    `json:"more_votes"`
	} `json:"queue"`
	LabellersReport []struct {
		Labeller     string   `json:"labeller"`
		Votes        int      `json:"votes"`
		Accuracy     *float64 `json:"accuracy"`
		GoldAccuracy *float64 `json:"gold_accuracy"`
	} `json:"labellers_report"`
	Pairs []struct {
		A          string   `json:"a"`
		B          string   `json:"b"`
		Items      int      `json:"items"`
		CohenKappa *float64 `json:"cohen_kappa"`
	} `json:"pairs"`
	Gold *struct {
		Items        int      `json:"items"`
		Correct      int      `json:"correct"`
		Accuracy     *float64 `json:"accuracy"`
		Method       string   `json:"method"`
		Tied         int      `json:"tied"`
		TiesSplit    *float64 `json:"accuracy_ties_split"`
		Unvoted      int      `json:"unvoted_items"`
		AddedClasses []string `json:"added_classes"`
	} `json:"gold"`
}

// agreeJSON runs agree --json and decodes its one object, failing on any
// text that is not exactly one JSON value.
func agreeJSON(t *testing.T, args ...string) (agreeOut, string) {
	t.Helper()
	r := runConcord(t, "", append([]string{"agree", "--json"}, args...))
	if r.err != nil {
		t.Fatalf("agree %v: %v\n%s", args, r.err, r.stderr)
	}
	for _, bad := range []string{"NaN", "Inf"} {
		if strings.Contains(r.stdout, bad) {
			t.Fatalf("JSON contains %s", bad)
		}
	}
	dec := json.NewDecoder(strings.NewReader(r.stdout))
	var out agreeOut
	if err := dec.Decode(&out); err != nil {
		t.Fatalf("decode: %v", err)
	}
	if _, err := dec.Token(); !errors.Is(err, io.EOF) {
		t.Fatalf("more than one JSON value on stdout")
	}
	return out, r.stderr
}

// loadCrowd builds votes and gold straight through agreement.Builder, the
// independent path the command's figures are checked against.
func loadCrowd(t *testing.T, dir string) (*agreement.Votes, map[int]int, *agreement.Builder) {
	t.Helper()
	read := func(name string) [][]string {
		f, err := os.Open(filepath.Join(dir, name))
		if err != nil {
			t.Fatal(err)
		}
		defer f.Close()
		rows, err := csv.NewReader(f).ReadAll()
		if err != nil {
			t.Fatal(err)
		}
		return rows[1:]
	}
	b := agreement.NewBuilder()
	for _, r := range read("votes.csv") {
		if _, err := b.Add(r[0], r[1], r[2], -1); err != nil {
			t.Fatal(err)
		}
	}
	gold := make(map[int]int)
	for _, r := range read("gold.csv") {
		it, _ := b.ItemID(r[0])
		c, _ := b.ClassID(r[1])
		gold[it] = c
	}
	return b.Build(), gold, b
}

func near(got *float64, want, tol float64) bool {
	return got != nil && math.Abs(*got-want) <= tol
}

// The crowd sets' reference accuracies are computed in each SOURCE.md
// (our own computation, not published): Dawid-Skene with 0.01 smoothing
// and majority vote with ties split evenly. Every other figure must equal
// what the agreement package computes from the same votes.
func TestAgreeCrowdSets(t *testing.T) {
	for _, tc := range []struct {
		name     string
		ds, mv   float64 // SOURCE.md: Dawid-Skene and majority-vote accuracy
		fleiss   float64 // SOURCE.md, 3 decimals
		pairsMin int
	}{
		{"bluebirds", 0.8981, 0.7593, 0.125, 10},
		{"rte", 0.9275, 0.8969, 0.241, 10},
		{"temp", 0.9416, 0.9361, 0.223, 10},
	} {
		t.Run(tc.name, func(t *testing.T) {
			dir := crowdData + tc.name
			v, gold, b := loadCrowd(t, dir)
			// --smoothing 0.01: the settings SOURCE.md's computation used.
			out, _ := agreeJSON(t, "--votes", dir+"/votes.csv", "--gold", dir+"/gold.csv", "--bootstrap", "50", "--smoothing", "0.01")
			if out.Items != v.NumItems || out.Labellers != v.NumLabellers || out.Votes != v.Len() || !slices.Equal(out.Classes, b.ClassNames()) {
				t.Errorf("counts %d/%d/%d %v, want %d/%d/%d %v", out.Items, out.Labellers, out.Votes, out.Classes, v.NumItems, v.NumLabellers, v.Len(), b.ClassNames())
			}
			fl, err := agreement.Fleiss(v)
			if err != nil {
				t.Fatal(err)
			}
			al, err := agreement.Alpha(v, agreement.AlphaOptions{})
			if err != nil {
				t.Fatal(err)
			}
			if out.FleissKappa == nil || *out.FleissKappa != fl.Kappa || !near(out.FleissKappa, tc.fleiss, 5e-4) {
				t.Errorf("fleiss_kappa %v, want %v (SOURCE.md %.3f)", out.FleissKappa, fl.Kappa, tc.fleiss)
			}
			for j, c := range b.ClassNames() {
				if got := out.FleissKappaByClass[c]; got == nil || *got != fl.PerCategory[j] {
					t.Errorf("fleiss_kappa_by_class[%s] %v, want %v", c, got, fl.PerCategory[j])
				}
			}
			if out.KrippendorffAlpha == nil || *out.KrippendorffAlpha != al.Alpha {
				t.Errorf("krippendorff_alpha %v, want %v", out.KrippendorffAlpha, al.Alpha)
			}
			// The consensus is the fit with gold held fixed.
			ds, err := agreement.DawidSkene(v, agreement.DawidSkeneOptions{Fixed: gold, Smoothing: 0.01})
			if err != nil {
				t.Fatal(err)
			}
			for i, c := range out.Consensus {
				_, isGold := gold[i]
				if c.Item != b.ItemNames()[i] || c.Label == nil || *c.Label != b.ClassNames()[ds.Label[i]] || *c.Confidence != ds.Confidence[i] || c.GoldFixed != isGold {
					t.Fatalf("consensus %d: %+v, want %s %v", i, c, b.ClassNames()[ds.Label[i]], ds.Confidence[i])
				}
			}
			// Gold accuracy comes from the fit without gold fixed, and
			// matches SOURCE.md's reference computation.
			if g := out.Gold; g == nil || g.Method != goldMethodDS || g.Items != len(gold) || !near(g.Accuracy, tc.ds, 5e-4) {
				t.Errorf("gold %+v, want accuracy %.4f from %q", g, tc.ds, goldMethodDS)
			}
			pairs, err := agreement.PairwiseCohen(v, agreement.PairOptions{MinShared: tc.pairsMin})
			if err != nil {
				t.Fatal(err)
			}
			if len(out.Pairs) != len(pairs) || len(pairs) == 0 {
				t.Fatalf("%d pairs, want %d", len(out.Pairs), len(pairs))
			}
			p, q := out.Pairs[0], pairs[0]
			if p.A != b.LabellerNames()[q.A] || p.B != b.LabellerNames()[q.B] || p.Items != q.Items || *p.CohenKappa != q.Kappa {
				t.Errorf("first pair %+v, want %+v", p, q)
			}
			rel, err := agreement.Reliability(v, ds, gold, agreement.ReliabilityOptions{})
			if err != nil {
				t.Fatal(err)
			}
			for i, r := range out.LabellersReport {
				if r.Votes != rel[i].Votes || *r.Accuracy != rel[i].EstimatedAccuracy || *r.GoldAccuracy != rel[i].GoldAccuracy {
					t.Fatalf("labeller %s: %+v, want %+v", r.Labeller, r, rel[i])
				}
			}

			mv, _ := agreeJSON(t, "--votes", dir+"/votes.csv", "--gold", dir+"/gold.csv", "--method", "mv", "--bootstrap", "0")
			if g := mv.Gold; g == nil || g.Method != goldMethodMV || !near(g.TiesSplit, tc.mv, 5e-4) {
				t.Errorf("majority vote gold %+v, want ties-split accuracy %.4f", g, tc.mv)
			} else if want := (float64(g.Correct)) / float64(g.Items); *g.Accuracy != want {
				t.Errorf("majority vote accuracy %v, want %v (ties wrong)", *g.Accuracy, want)
			}
		})
	}
}

// Fleiss (1971, Psychological Bulletin 76(5):378-382) diagnoses: 30
// subjects, 6 ratings each, kappa 0.430 in the paper; R irr kappam.fleiss
// prints 0.4302445 (= 5437/12637, see testdata/reference/README.md).
func TestAgreeFleiss1971Columns(t *testing.T) {
	out, _ := agreeJSON(t, "--votes", "../../testdata/reference/fleiss1971_diagnoses_long.csv",
		"--columns", "item=subject,labeller=rater,label=category", "--bootstrap", "0")
	if out.Items != 30 || out.Votes != 180 {
		t.Errorf("%d items, %d votes; want 30, 180", out.Items, out.Votes)
	}
	if !near(out.FleissKappa, 0.4302445, 5e-8) || !near(out.FleissKappa, 5437.0/12637, 1e-12) {
		t.Errorf("fleiss_kappa %v, want 0.4302445", out.FleissKappa)
	}
	if out.FleissBand == nil || out.FleissBand.Name != "Moderate" || out.FleissBand.Source != agreement.LandisKochSource {
		t.Errorf("band %+v, want Moderate from Landis & Koch", out.FleissBand)
	}
}

func TestAgreeBadInput(t *testing.T) {
	tie := agreeData + "tie.csv"
	for _, tc := range []struct {
		args []string
		want string
	}{
		{[]string{"--votes", agreeData + "missing_column.csv"}, agreeData + `missing_column.csv:1: header: missing column "label" (header has item,labeller)`},
		{[]string{"--votes", agreeData + "repeated_column.csv"}, agreeData + `repeated_column.csv:1: field "item": column appears twice (columns 1 and 4)`},
		{[]string{"--votes", agreeData + "empty_label.csv"}, agreeData + `empty_label.csv:3: field "label": empty`},
		{[]string{"--votes", agreeData + "empty_item.csv"}, agreeData + `empty_item.csv:3: field "item": empty`},
		{[]string{"--votes", agreeData + "empty_labeller.csv"}, agreeData + `empty_labeller.csv:3: field "labeller": empty`},
		{[]string{"--votes", agreeData + "bad_seconds.csv"}, agreeData + `bad_seconds.csv:3: field "seconds": "quick" is not a number of seconds >= 0`},
		{[]string{"--votes", agreeData + "negative_seconds.csv"}, agreeData + `negative_seconds.csv:3: field "seconds": "-2" is not a number of seconds >= 0`},
		{[]string{"--votes", agreeData + "field_count.csv"}, agreeData + `field_count.csv:3: 4 fields, header has 3`},
		{[]string{"--votes", agreeData + "bad_quote.csv"}, agreeData + `bad_quote.csv:2: record runs to line 3, column 20: extraneous or missing " in quoted-field`},
		{[]string{"--votes", agreeData + "header_only.csv"}, agreeData + `header_only.csv: no votes after the header`},
		{[]string{"--votes", agreeData + "votes.csv", "--columns", "item=subject"}, agreeData + `votes.csv:1: header: missing column "subject" (header has camera,item,labeller,label,seconds)`},
		{[]string{"--votes", tie, "--gold", agreeData + "gold_repeated.csv"}, agreeData + `gold_repeated.csv:3: field "item": item "belt-0001" already has a gold label on line 2`},
		{[]string{"--votes", tie, "--gold", agreeData + "gold_empty_label.csv"}, agreeData + `gold_empty_label.csv:2: field "label": empty`},
		{[]string{"--votes", tie, "--gold", agreeData + "gold_missing_column.csv"}, agreeData + `gold_missing_column.csv:1: header: missing column "label" (header has item)`},
		{[]string{"--votes", agreeData + "nonexistent.csv"}, "agree: open " + agreeData + "nonexistent.csv: no such file or directory"},
	} {
		r := runConcord(t, "", append([]string{"agree"}, tc.args...))
		if r.err == nil || r.err.Error() != tc.want {
			t.Errorf("agree %v:\n got %v\nwant %s", tc.args, r.err, tc.want)
		}
	}
	for _, args := range [][]string{{}, {"--votes", tie, "--method", "vote"}, {"--votes", tie, "--max-votes", "1", "--min-votes", "2"}, {"--votes", tie, "--target", "1.5"}} {
		var ue usageError
		if r := runConcord(t, "", append([]string{"agree"}, args...)); !errors.As(r.err, &ue) {
			t.Errorf("agree %v: %v, want a usage error", args, r.err)
		}
	}
}

// duplicate.csv: ana votes on belt-0001 on lines 2, 4 and 7; the vote on
// line 7 (residual waste) is the one kept, which ties with bo's glass.
func TestAgreeDuplicateVotes(t *testing.T) {
	out, stderr := agreeJSON(t, "--votes", agreeData+"duplicate.csv", "--method", "mv", "--bootstrap", "0")
	want := fmt.Sprintf("concord agree: %[1]s:4: labeller \"ana\" voted on item \"belt-0001\" again (earlier vote on line 2); the later vote is kept\n"+
		"concord agree: %[1]s:7: labeller \"ana\" voted on item \"belt-0001\" again (earlier vote on line 4); the later vote is kept\n", agreeData+"duplicate.csv")
	if stderr != want {
		t.Errorf("stderr:\n%s\nwant:\n%s", stderr, want)
	}
	if out.DuplicateVotes != 2 || out.Votes != 4 {
		t.Errorf("duplicate_votes %d, votes %d; want 2, 4", out.DuplicateVotes, out.Votes)
	}
	c := out.Consensus[0]
	if c.Item != "belt-0001" || c.Label != nil || !c.Tied || !slices.Equal(c.TiedLabels, []string{"glass", "residual waste"}) || c.Votes != 2 {
		t.Errorf("belt-0001: %+v, want a glass/residual waste tie on 2 votes", c)
	}
	// PET bottle was voted once and then replaced: a class with no votes
	// has no per-class kappa.
	if k, ok := out.FleissKappaByClass["PET bottle"]; !ok || k != nil {
		t.Errorf("PET bottle kappa %v (present %v), want null", k, ok)
	}
}

// A majority-vote tie has a null label and tied: true; it is not done.
// Neither is the unanimous item, though its share is 1: the policy reads the
// Dawid-Skene posterior, and two votes from two labellers seen on two items
// leave that below the 0.95 target.
func TestAgreeMajorityTie(t *testing.T) {
	out, _ := agreeJSON(t, "--votes", agreeData+"tie.csv", "--method", "mv", "--bootstrap", "0")
	c := out.Consensus[0]
	if c.Label != nil || !c.Tied || !slices.Equal(c.TiedLabels, []string{"glass", "PET bottle"}) || c.Status != "needs_votes" || !near(c.Confidence, 0.5, 0) {
		t.Errorf("tied item: %+v", c)
	}
	if d := out.Consensus[1]; d.Label == nil || *d.Label != "glass" || d.Tied || !near(d.Confidence, 1, 0) || d.Status != "needs_votes" {
		t.Errorf("unanimous item: %+v", d)
	}
}

// Every vote in one class: kappa and alpha are undefined and must come out
// as null, not NaN, with no band.
func TestAgreeUndefinedIsNull(t *testing.T) {
	out, _ := agreeJSON(t, "--votes", agreeData+"one_class.csv")
	if out.FleissKappa != nil || out.KrippendorffAlpha != nil || out.FleissBand != nil || out.FleissKappaByClass["glass"] != nil {
		t.Errorf("kappa %v alpha %v band %v, want null", out.FleissKappa, out.KrippendorffAlpha, out.FleissBand)
	}
	r := runConcord(t, "", []string{"agree", "--votes", agreeData + "one_class.csv"})
	if r.err != nil || !strings.Contains(r.stdout, "Fleiss' kappa             n/a  95% CI n/a") {
		t.Errorf("text report: %v\n%s", r.err, r.stdout)
	}
}

func TestAgreeGoldExtras(t *testing.T) {
	out, stderr := agreeJSON(t, "--votes", agreeData+"tie.csv", "--gold", agreeData+"gold_extra.csv", "--bootstrap", "0")
	g := agreeData + "gold_extra.csv"
	want := "concord agree: " + g + ":3: 2 gold items have no votes and are skipped (the first is on this line)\n" +
		"concord agree: " + g + ": gold labels no vote used, added as classes: aluminium can\n"
	if stderr != want {
		t.Errorf("stderr:\n%s\nwant:\n%s", stderr, want)
	}
	if !slices.Equal(out.Classes, []string{"glass", "PET bottle", "aluminium can"}) || out.Gold == nil ||
		out.Gold.Items != 2 || out.Gold.Unvoted != 2 || !slices.Equal(out.Gold.AddedClasses, []string{"aluminium can"}) {
		t.Errorf("classes %v gold %+v", out.Classes, out.Gold)
	}
	// Gold held fixed: belt-0002 is "aluminium can" in the consensus
	// although both votes say glass.
	if c := out.Consensus[1]; c.Label == nil || *c.Label != "aluminium can" || !c.GoldFixed {
		t.Errorf("belt-0002: %+v", c)
	}
}

func TestAgreeTextReport(t *testing.T) {
	r := runConcord(t, "", []string{"agree", "--votes", agreeData + "votes.csv", "--gold", agreeData + "gold.csv", "--bootstrap", "200"})
	if r.err != nil {
		t.Fatal(r.err)
	}
	v, err := readVotesCSV("votes.csv", strings.NewReader(mustRead(t, agreeData+"votes.csv")), defaultVoteColumns)
	if err != nil {
		t.Fatal(err)
	}
	fl, _ := agreement.Fleiss(v.votes)
	al, _ := agreement.Alpha(v.votes, agreement.AlphaOptions{})
	kb, _ := agreement.LandisKoch(fl.Kappa)
	ab, _ := agreement.KrippendorffRule(al.Alpha)
	for _, want := range []string{
		"12 items, 5 labellers, 38 votes, 5 classes",
		fmt.Sprintf("Fleiss' kappa           %.3f", fl.Kappa), kb.Name, "band from " + agreement.LandisKochSource,
		fmt.Sprintf("Krippendorff's alpha    %.3f", al.Alpha), ab.Name, "band from Krippendorff (2004)",
		"Labellers, flagged first", "Vote policy: min 2, max 7 votes, target 0.95",
		"Items needing votes", "Gold: consensus right on", goldMethodDS,
	} {
		if !strings.Contains(r.stdout, want) {
			t.Errorf("report lacks %q:\n%s", want, r.stdout)
		}
	}
	for i, line := range strings.Split(r.stdout, "\n") {
		if n := utf8.RuneCountInString(line); n > 100 {
			t.Errorf("line %d has %d columns: %s", i+1, n, line)
		}
	}
}

func mustRead(t *testing.T, path string) string {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}

// Every float in the report goes through nfloat, so no NaN or Inf can
// reach the encoder (which would fail the whole command).
func TestAgreeReportFloatsAreNullable(t *testing.T) {
	nf := reflect.TypeFor[nfloat]()
	seen := map[reflect.Type]bool{}
	var walk func(reflect.Type, string)
	walk = func(tp reflect.Type, path string) {
		if tp == nf || seen[tp] {
			return
		}
		seen[tp] = true
		switch tp.Kind() {
		case reflect.Float32, reflect.Float64:
			t.Errorf("%s is %s, want nfloat", path, tp)
		case reflect.Pointer, reflect.Slice, reflect.Array:
			walk(tp.Elem(), path+"[]")
		case reflect.Map:
			walk(tp.Elem(), path+"{}")
		case reflect.Struct:
			for i := range tp.NumField() {
				walk(tp.Field(i).Type, path+"."+tp.Field(i).Name)
			}
		}
	}
	walk(reflect.TypeFor[agreeReport](), "agreeReport")

	b, err := json.Marshal(map[string]nfloat{"a": nfloat(math.NaN()), "b": nfloat(math.Inf(1)), "c": nfloat(math.Inf(-1)), "d": 0.25, "e": 1e-9})
	if err != nil || string(b) != `{"a":null,"b":null,"c":null,"d":0.25,"e":1e-09}` {
		t.Errorf("got %s, %v", b, err)
	}
}

// writeMillionVotes writes a 1,000,000-vote CSV: 100,000 items x 10 votes
// from a simulated crowd of 500 labellers over 20 classes, with seconds.
func writeMillionVotes(tb testing.TB, path string) {
	tb.Helper()
	crowd, err := agreement.NewCrowd(agreement.CrowdOptions{Items: 100_000, Classes: 20, Seed: 7,
		Groups: []agreement.CrowdGroup{{Kind: "careful", Count: 100}, {Kind: "average", Count: 250}, {Kind: "sloppy", Count: 125}, {Kind: "random", Count: 15}, {Kind: "biased", Count: 10}}})
	if err != nil {
		tb.Fatal(err)
	}
	counts := make([]int, crowd.NumItems)
	for i := range counts {
		counts[i] = 10
	}
	v, err := crowd.VotesFor(counts)
	if err != nil {
		tb.Fatal(err)
	}
	f, err := os.Create(path)
	if err != nil {
		tb.Fatal(err)
	}
	w := bufio.NewWriter(f)
	fmt.Fprintln(w, "item,labeller,label,seconds")
	for i := range v.Item {
		fmt.Fprintf(w, "belt-%06d,labeller-%03d,class-%02d,%.1f\n", v.Item[i], v.Labeller[i], v.Label[i], 2+float64(i%50)/10)
	}
	if err := w.Flush(); err != nil {
		tb.Fatal(err)
	}
	if err := f.Close(); err != nil {
		tb.Fatal(err)
	}
}

// BenchmarkAgreeCSV1M times parsing a 1,000,000-vote CSV and the whole
// agree --json run on it (two Dawid-Skene fits are not needed: no gold).
func BenchmarkAgreeCSV1M(b *testing.B) {
	if testing.Short() {
		b.Skip("1M-vote file skipped under -short")
	}
	path := filepath.Join(b.TempDir(), "votes.csv")
	writeMillionVotes(b, path)
	b.Run("parse", func(b *testing.B) {
		for b.Loop() {
			f, err := os.Open(path)
			if err != nil {
				b.Fatal(err)
			}
			vt, err := readVotesCSV(path, f, defaultVoteColumns)
			f.Close()
			if err != nil || vt.votes.Len() != 1_000_000 {
				b.Fatalf("%v", err)
			}
		}
	})
	b.Run("total", func(b *testing.B) {
		e := &env{stdout: io.Discard, stderr: io.Discard}
		for b.Loop() {
			if err := run(b.Context(), e, []string{"agree", "--json", "--votes", path}); err != nil {
				b.Fatal(err)
			}
		}
	})
}

// The vote policy plans from the Dawid-Skene posteriors whichever consensus
// --method reports (see agreeUsage), because vote shares are not
// probabilities: with mv, labels and confidences are majority vote's, but
// statuses and the queue must be those of Plan on the gold-fixed fit. The
// data must make the two plans differ, or the test could not tell them
// apart.
func TestAgreeMajorityPlansFromDawidSkene(t *testing.T) {
	vt, err := readVotesCSV("votes.csv", strings.NewReader(mustRead(t, agreeData+"votes.csv")), defaultVoteColumns)
	if err != nil {
		t.Fatal(err)
	}
	v, b := vt.votes, vt.builder
	gold := map[int]int{}
	for _, r := range [][2]string{{"belt-0003", "cardboard"}, {"belt-0004", "glass"}, {"belt-0008", "residual waste"}, {"belt-0009", "aluminium can"}, {"belt-0012", "cardboard"}} {
		it, ok1 := b.ItemID(r[0])
		c, ok2 := b.ClassID(r[1])
		if !ok1 || !ok2 {
			t.Fatalf("gold.csv row %v not in votes.csv", r)
		}
		gold[it] = c
	}
	ds, err := agreement.DawidSkene(v, agreement.DawidSkeneOptions{Fixed: gold})
	if err != nil {
		t.Fatal(err)
	}
	mv, err := agreement.MajorityVote(v)
	if err != nil {
		t.Fatal(err)
	}
	policy := agreement.VotePolicy{MinVotes: 2, MaxVotes: 7, Target: 0.95} // agree's defaults
	avg := agreement.AverageConfusion(ds)
	want, err := policy.Plan(&ds.Consensus, avg)
	if err != nil {
		t.Fatal(err)
	}
	wrong, err := policy.Plan(&mv.Consensus, avg)
	if err != nil {
		t.Fatal(err)
	}
	differ := 0
	for i := range want {
		if want[i].Status != wrong[i].Status {
			differ++
		}
	}
	if differ == 0 {
		t.Fatal("vote shares and Dawid-Skene posteriors give the same statuses: the data cannot catch a mix-up")
	}
	wantQueue := agreement.Queue(want)

	out, _ := agreeJSON(t, "--votes", agreeData+"votes.csv", "--gold", agreeData+"gold.csv", "--method", "mv", "--bootstrap", "0")
	for i, c := range out.Consensus {
		if c.Status != want[i].Status.String() || c.Votes != want[i].Votes {
			t.Errorf("%s: status %s on %d votes, want %s on %d (vote shares would give %s)", c.Item, c.Status, c.Votes, want[i].Status, want[i].Votes, wrong[i].Status)
		}
		if c.Confidence == nil || *c.Confidence != mv.Confidence[i] {
			t.Errorf("%s: confidence %v, want the majority share %v", c.Item, c.Confidence, mv.Confidence[i])
		}
	}
	if len(out.Queue) != len(wantQueue) {
		t.Fatalf("queue has %d items, want %d", len(out.Queue), len(wantQueue))
	}
	for i, q := range out.Queue {
		if w := wantQueue[i]; q.Item != b.ItemNames()[w.Item] || q.MoreVotes != w.MoreVotes {
			t.Errorf("queue %d: %+v, want %s needing %d more", i, q, b.ItemNames()[w.Item], w.MoreVotes)
		}
	}
}
