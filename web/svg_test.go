package web

import (
	"encoding/xml"
	"math"
	"strconv"
	"strings"
	"testing"

	"github.com/PuerkitoBio/goquery"
)

func parseSVG(t *testing.T, s string) *goquery.Document {
	t.Helper()
	// Well-formed XML is what a browser's SVG parser needs too.
	d := xml.NewDecoder(strings.NewReader(s))
	for {
		if _, err := d.Token(); err != nil {
			if err.Error() == "EOF" {
				break
			}
			t.Fatalf("SVG is not well-formed XML: %v\n%s", err, s)
		}
	}
	doc, err := goquery.NewDocumentFromReader(strings.NewReader(s))
	if err != nil {
		t.Fatal(err)
	}
	return doc
}

func attrFloat(t *testing.T, s *goquery.Selection, name string) float64 {
	t.Helper()
	v, err := strconv.ParseFloat(s.AttrOr(name, "?"), 64)
	if err != nil {
		t.Fatalf("attribute %s: %v", name, err)
	}
	return v
}

func TestBarChart(t *testing.T) {
	c := BarChart{ID: "status", Title: "Items by status", XLabel: "status", YLabel: "items",
		Bars: []Bar{{Label: "done", Value: 40}, {Label: "needs votes", Value: 10}, {Label: "<review>", Value: 0}}}
	doc := parseSVG(t, c.SVG())
	if got := doc.Find("svg > title").Text(); got != "Items by status" {
		t.Errorf("title = %q", got)
	}
	desc := doc.Find("svg > desc").Text()
	if !strings.Contains(desc, "done: 40") || !strings.Contains(desc, "<review>: 0") {
		t.Errorf("desc = %q, want every value", desc)
	}
	var labels []string
	doc.Find("text.axis-label").Each(func(_ int, s *goquery.Selection) { labels = append(labels, s.Text()) })
	if strings.Join(labels, "|") != "status|items" {
		t.Errorf("axis labels = %q", labels)
	}
	rects := doc.Find("rect.bar")
	if rects.Length() != 3 {
		t.Fatalf("%d bars, want 3", rects.Length())
	}
	// The axis top is 50 (niceMax of 40), so heights are 40/50 and 10/50 of the plot.
	plotH := chartH - chartTop - chartBottom
	h0, h1 := attrFloat(t, rects.Eq(0), "height"), attrFloat(t, rects.Eq(1), "height")
	if math.Abs(h0-plotH*0.8) > 0.1 || math.Abs(h1-plotH*0.2) > 0.1 {
		t.Errorf("bar heights %v, %v; want %v, %v", h0, h1, plotH*0.8, plotH*0.2)
	}
	if strings.Contains(c.SVG(), "style=") {
		t.Error("chart uses a style attribute, which the CSP blocks")
	}
}

func TestNiceMax(t *testing.T) {
	for _, tc := range []struct{ in, want float64 }{{0, 1}, {0.3, 0.5}, {1, 1}, {7, 10}, {40, 50}, {101, 200}, {1999, 2000}} {
		if got := niceMax(tc.in); got != tc.want {
			t.Errorf("niceMax(%v) = %v, want %v", tc.in, got, tc.want)
		}
	}
}

func TestLineChartGaps(t *testing.T) {
	c := LineChart{ID: "vph", Title: "Votes per hour", XLabel: "hour (UTC)", YLabel: "votes per hour",
		Points: []Point{{Label: "a", Y: 10}, {Label: "b", Y: 20}, {Label: "c", Missing: true}, {Label: "d", Y: 5}}}
	doc := parseSVG(t, c.SVG())
	d := doc.Find("path.line").AttrOr("d", "")
	// Two runs: a-b, then a fresh move to d after the gap.
	if strings.Count(d, "M") != 2 || strings.Count(d, "L") != 1 {
		t.Errorf("path %q, want two pieces broken at the gap", d)
	}
	if n := doc.Find("circle.dot").Length(); n != 3 {
		t.Errorf("%d dots, want 3 (the missing point has none)", n)
	}
	if !strings.Contains(doc.Find("desc").Text(), "c: none") {
		t.Errorf("desc %q does not say the gap", doc.Find("desc").Text())
	}
}

func TestHeatmap(t *testing.T) {
	c := Heatmap{ID: "conf", Title: "Confusion", XLabel: "vote", YLabel: "consensus",
		Rows: []string{"glass", "pet"}, Cols: []string{"glass", "pet"},
		Cells: [][]float64{{8, 2}, {0, math.NaN()}}}
	doc := parseSVG(t, c.SVG())
	cells := doc.Find("rect.cell")
	if cells.Length() != 4 {
		t.Fatalf("%d cells", cells.Length())
	}
	want := []float64{1, 0.25, 0, 0}
	cells.Each(func(i int, s *goquery.Selection) {
		if got := attrFloat(t, s, "fill-opacity"); math.Abs(got-want[i]) > 1e-3 {
			t.Errorf("cell %d opacity %v, want %v", i, got, want[i])
		}
	})
	var texts []string
	doc.Find("text.cell-text").Each(func(_ int, s *goquery.Selection) { texts = append(texts, s.Text()) })
	if strings.Join(texts, ",") != "8,2,0," {
		t.Errorf("cell texts %q", texts)
	}
}
