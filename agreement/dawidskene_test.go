package agreement

import (
	"math"
	"strconv"
	"strings"
	"testing"
)

func atoi(t testing.TB, s string) int {
	t.Helper()
	n, err := strconv.Atoi(s)
	if err != nil {
		t.Fatalf("reference data: %v", err)
	}
	return n
}

func atof(t testing.TB, s string) float64 {
	t.Helper()
	x, err := strconv.ParseFloat(s, 64)
	if err != nil {
		t.Fatalf("reference data: %v", err)
	}
	return x
}

// anaesthesiaVotes loads Dawid & Skene's (1979) Table 1 as dense votes.
// Labeller 1's three ratings per patient stay three separate votes, as in
// the paper, which is why this bypasses Builder (it keeps one per pair).
func anaesthesiaVotes(t testing.TB) *Votes {
	v := &Votes{NumItems: 45, NumLabellers: 5, NumClasses: 4}
	for _, r := range refRows(t, "dawid_skene1979_anaesthesia_long.csv") {
		v.Item = append(v.Item, int32(atoi(t, r[0])-1))
		v.Labeller = append(v.Labeller, int32(atoi(t, r[1])-1))
		v.Label = append(v.Label, int32(atoi(t, r[2])-1))
	}
	return v
}

// The expected values are recomputed, not published: the reference README
// (section 5) ran plain ML EM from the paper's eq. (3.1) start, because the
// paper's own estimates were not available. They check this implementation
// against an independent one on Dawid & Skene's (1979) Table 1 data.
func TestDawidSkene1979Anaesthesia(t *testing.T) {
	v := anaesthesiaVotes(t)
	res, err := DawidSkene(v, DawidSkeneOptions{NoSmoothing: true, Tolerance: 1e-15, MaxIterations: 10000})
	if err != nil {
		t.Fatal(err)
	}
	const wantMAP = "142222132243121111222222112111131224233111212"
	var got strings.Builder
	for _, c := range res.Label {
		got.WriteString(strconv.Itoa(int(c) + 1))
	}
	if got.String() != wantMAP {
		t.Errorf("MAP classes\n got %s\nwant %s", got.String(), wantMAP)
	}
	wantPrior := []float64{0.399555, 0.421983, 0.111795, 0.066667}
	for k, p := range wantPrior {
		if math.Abs(res.Prior[k]-p) > 1e-4 {
			t.Errorf("prior %d = %.6f, want %.6f", k+1, res.Prior[k], p)
		}
	}
	if math.Abs(res.LogLikelihood-(-192.890881)) > 1e-4 {
		t.Errorf("log-likelihood %.6f, want -192.890881", res.LogLikelihood)
	}
	for _, r := range refRows(t, "dawid_skene1979_em_posteriors.csv") {
		item := atoi(t, r[0]) - 1
		for k := 0; k < 4; k++ {
			if want, got := atof(t, r[1+k]), res.PosteriorOf(item)[k]; math.Abs(got-want) > 1e-4 {
				t.Errorf("item %d class %d posterior %.6f, want %.6f", item+1, k+1, got, want)
			}
		}
	}
	for _, r := range refRows(t, "dawid_skene1979_em_error_rates.csv") {
		l, tc, j := atoi(t, r[0])-1, atoi(t, r[1])-1, atoi(t, r[2])-1
		if want, got := atof(t, r[3]), res.ConfusionOf(l)[tc*4+j]; math.Abs(got-want) > 1e-4 {
			t.Errorf("labeller %d true %d label %d: %.6f, want %.6f", l+1, tc+1, j+1, got, want)
		}
	}
	if !res.Converged {
		t.Errorf("did not converge in %d iterations", res.Iterations)
	}
}
