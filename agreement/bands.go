package agreement

import "math"

// Band is a plain-words reading of a kappa or alpha value, with the source
// a page should print beside it.
type Band struct {
	Name   string
	Lower  float64 // bounds as the source prints them; the function
	Upper  float64 // returning the band says which ends are closed
	Source string
}

// LandisKochSource is the citation to print with a Landis & Koch band.
const LandisKochSource = "Landis & Koch (1977), Biometrics 33(1):159-174"

// landisKoch is the table of Landis & Koch (1977); names and bounds as in
// testdata/reference/landis_koch1977_bands.csv.
var landisKoch = []Band{
	{Name: "Poor", Lower: -1, Upper: 0},
	{Name: "Slight", Lower: 0, Upper: 0.2},
	{Name: "Fair", Lower: 0.2, Upper: 0.4},
	{Name: "Moderate", Lower: 0.4, Upper: 0.6},
	{Name: "Substantial", Lower: 0.6, Upper: 0.8},
	{Name: "Almost Perfect", Lower: 0.8, Upper: 1},
}

// LandisKochBands returns the six bands, lowest first.
func LandisKochBands() []Band {
	out := make([]Band, len(landisKoch))
	for i, b := range landisKoch {
		b.Source = LandisKochSource
		out[i] = b
	}
	return out
}

// LandisKoch places a kappa in the Landis & Koch (1977) bands. The paper
// prints two-decimal ranges (0.00-0.20 Slight, 0.21-0.40 Fair, ...) that
// leave gaps such as 0.20 < x < 0.21. Concord cuts exactly at the printed
// upper bounds, each one inclusive: Poor x < 0, Slight 0 <= x <= 0.20, Fair
// 0.20 < x <= 0.40, Moderate to 0.60, Substantial to 0.80, Almost Perfect
// to 1. So 0.20 stays Slight, as printed, and anything above it, 0.2001 or
// 0.205, is Fair; no value depends on how it was rounded. ok is false for
// NaN and for values outside [-1, 1], which no kappa takes.
func LandisKoch(kappa float64) (b Band, ok bool) {
	if math.IsNaN(kappa) || kappa < -1 || kappa > 1 {
		return Band{}, false
	}
	i := 0
	if kappa >= 0 {
		i = 1
		for kappa > landisKoch[i].Upper {
			i++
		}
	}
	b = landisKoch[i]
	b.Source = LandisKochSource
	return b, true
}

// KrippendorffSource is the citation for KrippendorffRule; the thresholds
// are from memory of the book, not checked against a stored copy.
const KrippendorffSource = "Krippendorff (2004), Content Analysis: An Introduction to Its Methodology, 2nd ed. (from memory)"

// KrippendorffRule reads alpha by Krippendorff's rule of thumb: rely on
// data with alpha >= 0.800, draw only tentative conclusions from 0.667 <=
// alpha < 0.800, and discard data below 0.667. ok is false for NaN and
// values above 1 (alpha has no lower bound).
func KrippendorffRule(alpha float64) (b Band, ok bool) {
	switch {
	case math.IsNaN(alpha) || alpha > 1:
		return Band{}, false
	case alpha >= 0.8:
		return Band{Name: "Reliable", Lower: 0.8, Upper: 1, Source: KrippendorffSource}, true
	case alpha >= 0.667:
		return Band{Name: "Tentative", Lower: 0.667, Upper: 0.8, Source: KrippendorffSource}, true
	default:
		return Band{Name: "Unreliable", Lower: math.Inf(-1), Upper: 0.667, Source: KrippendorffSource}, true
	}
}
