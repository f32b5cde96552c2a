package agreement

import (
	"math"
	"testing"
)

// The table in code must match the bands file (labels and bounds quoted
// from irrCAC's landis.koch data set, which cites Landis & Koch 1977,
// Biometrics 33(1):159-174; reference README section 6).
func TestLandisKochMatchesReference(t *testing.T) {
	ref := loadReference(t, "landis_koch1977_bands.csv")
	bands := LandisKochBands()
	if len(bands) != len(ref.rows) {
		t.Fatalf("%d bands, file has %d", len(bands), len(ref.rows))
	}
	for i, row := range ref.rows {
		b := bands[i]
		name := row[ref.column(t, "strength_of_agreement")]
		if b.Name != name || b.Lower != ref.number(t, i, "lower") || b.Upper != ref.number(t, i, "upper") || b.Source != LandisKochSource {
			t.Errorf("band %d = %+v, file says %s %v..%v", i, b, name, ref.number(t, i, "lower"), ref.number(t, i, "upper"))
		}
	}
}

func TestLandisKochPlacement(t *testing.T) {
	for _, c := range []struct {
		kappa float64
		want  string
	}{
		{-1, "Poor"}, {-0.01, "Poor"},
		{0, "Slight"}, {0.2, "Slight"}, // boundaries stay in the lower band, as printed
		{0.2001, "Fair"}, {0.205, "Fair"}, {0.21, "Fair"}, // the 0.20-0.21 gap: Concord's choice
		{0.4, "Fair"}, {0.41, "Moderate"}, {0.43, "Moderate"}, // Fleiss (1971) data: 0.430
		{0.6, "Moderate"}, {0.8, "Substantial"}, {0.81, "Almost Perfect"}, {1, "Almost Perfect"},
	} {
		b, ok := LandisKoch(c.kappa)
		if !ok || b.Name != c.want || b.Source != LandisKochSource {
			t.Errorf("LandisKoch(%v) = %+v, %v; want %s", c.kappa, b, ok, c.want)
		}
	}
	for _, bad := range []float64{math.NaN(), -1.01, 1.01} {
		if _, ok := LandisKoch(bad); ok {
			t.Errorf("LandisKoch(%v) accepted", bad)
		}
	}
}

// Krippendorff's 0.667 / 0.800 thresholds (Content Analysis, 2004; from
// memory). The Krippendorff (2011) example's nominal 0.743 is tentative and
// its interval 0.849 reliable.
func TestKrippendorffRule(t *testing.T) {
	for _, c := range []struct {
		alpha float64
		want  string
	}{
		{0.849, "Reliable"}, {0.8, "Reliable"}, {0.7999, "Tentative"}, {0.743, "Tentative"},
		{0.667, "Tentative"}, {0.6669, "Unreliable"}, {-0.5, "Unreliable"},
	} {
		b, ok := KrippendorffRule(c.alpha)
		if !ok || b.Name != c.want {
			t.Errorf("KrippendorffRule(%v) = %+v, %v; want %s", c.alpha, b, ok, c.want)
		}
	}
	if _, ok := KrippendorffRule(math.NaN()); ok {
		t.Error("NaN accepted")
	}
}
