package web

import (
	"context"
	"fmt"
	"html"
	"io"
	"math"
	"strconv"
	"strings"

	"github.com/a-h/templ"
)

// Charts are drawn on the server as inline SVG so the browser needs no chart
// library and no script. Geometry and per-cell shading go in attributes,
// colours come from classes in lead.css: the page's CSP forbids style="".
// Every chart carries a <title> and a <desc> listing its values, so a screen
// reader gets the numbers the picture shows.

const (
	chartW      = 640.0
	chartH      = 280.0
	chartLeft   = 64.0 // room for y tick labels and the y axis label
	chartRight  = 16.0
	chartTop    = 32.0 // room for the title
	chartBottom = 56.0 // room for x tick labels and the x axis label
)

// Bar is one bar of a BarChart.
type Bar struct {
	Label string
	Value float64
	Class string // extra CSS class, e.g. "bar-review"
}

// BarChart is a vertical bar chart. YLabel names the unit ("items").
type BarChart struct {
	ID     string
	Title  string
	XLabel string
	YLabel string
	Bars   []Bar
	// Format prints a value; integers when nil.
	Format func(float64) string
	// Max fixes the top of the y axis (for shares, 1); from the data when 0.
	Max float64
}

// Point is one point of a LineChart; Label is its x tick text.
type Point struct {
	Label string
	Y     float64
	// Missing marks a gap (no value for this x), drawn as a break in the line.
	Missing bool
}

// LineChart is a line over evenly spaced x positions.
type LineChart struct {
	ID     string
	Title  string
	XLabel string
	YLabel string
	Points []Point
	Format func(float64) string
	// Min and Max fix the y axis range when Max > Min.
	Min, Max float64
	// TickEvery labels every n-th x position (1 when 0).
	TickEvery int
}

// Heatmap is a grid of values with row and column headers; darker is more.
type Heatmap struct {
	ID     string
	Title  string
	XLabel string // what the columns are
	YLabel string // what the rows are
	Rows   []string
	Cols   []string
	Cells  [][]float64 // Cells[r][c]; NaN draws an empty cell
	// Text is what each cell prints; the value formatted with Format when nil.
	Text   [][]string
	Format func(float64) string
	// Max is the value drawn at full strength; the largest cell when 0.
	Max float64
}

func intFormat(v float64) string { return strconv.FormatFloat(math.Round(v), 'f', 0, 64) }

func esc(s string) string { return html.EscapeString(s) }

func num(v float64) string { return strconv.FormatFloat(v, 'f', 1, 64) }

// niceMax rounds a positive maximum up to 1, 2 or 5 times a power of ten, so
// axis ticks land on round numbers.
func niceMax(v float64) float64 {
	if v <= 0 || math.IsNaN(v) || math.IsInf(v, 0) {
		return 1
	}
	p := math.Pow(10, math.Floor(math.Log10(v)))
	for _, m := range []float64{1, 2, 5, 10} {
		if v <= m*p {
			return m * p
		}
	}
	return 10 * p
}

// svgStart writes the opening tag, title and description shared by all charts.
func svgStart(b *strings.Builder, id, title, desc string, w, h float64) {
	fmt.Fprintf(b, `<svg class="chart" xmlns="http://www.w3.org/2000/svg" viewBox="0 0 %s %s" width="100%%" role="img" aria-labelledby="%s-t %s-d" id="%s">`,
		num(w), num(h), esc(id), esc(id), esc(id))
	fmt.Fprintf(b, `<title id="%s-t">%s</title><desc id="%s-d">%s</desc>`, esc(id), esc(title), esc(id), esc(desc))
	fmt.Fprintf(b, `<text class="chart-title" x="%s" y="18" text-anchor="middle">%s</text>`, num(w/2), esc(title))
}

// axes draws the plot frame, y ticks (0, max/2, max, formatted) and both axis labels.
func axes(b *strings.Builder, xLabel, yLabel string, lo, hi float64, format func(float64) string) {
	x0, x1 := chartLeft, chartW-chartRight
	y0, y1 := chartH-chartBottom, chartTop
	fmt.Fprintf(b, `<line class="axis" x1="%s" y1="%s" x2="%s" y2="%s"/>`, num(x0), num(y0), num(x1), num(y0))
	fmt.Fprintf(b, `<line class="axis" x1="%s" y1="%s" x2="%s" y2="%s"/>`, num(x0), num(y0), num(x0), num(y1))
	for i := 0; i <= 4; i++ {
		v := lo + (hi-lo)*float64(i)/4
		y := y0 - (y0-y1)*float64(i)/4
		fmt.Fprintf(b, `<line class="grid" x1="%s" y1="%s" x2="%s" y2="%s"/>`, num(x0), num(y), num(x1), num(y))
		fmt.Fprintf(b, `<text class="tick" x="%s" y="%s" text-anchor="end">%s</text>`, num(x0-6), num(y+4), esc(format(v)))
	}
	fmt.Fprintf(b, `<text class="axis-label" x="%s" y="%s" text-anchor="middle">%s</text>`, num((x0+x1)/2), num(chartH-8), esc(xLabel))
	fmt.Fprintf(b, `<text class="axis-label" x="14" y="%s" text-anchor="middle" transform="rotate(-90 14 %s)">%s</text>`,
		num((y0+y1)/2), num((y0+y1)/2), esc(yLabel))
}

func writeSVG(s string) templ.Component {
	return templ.ComponentFunc(func(_ context.Context, w io.Writer) error {
		_, err := io.WriteString(w, s)
		return err
	})
}

// SVG renders the bar chart.
func (c BarChart) SVG() string {
	format := c.Format
	if format == nil {
		format = intFormat
	}
	var desc []string
	top := c.Max
	for _, bar := range c.Bars {
		desc = append(desc, bar.Label+": "+format(bar.Value))
		if c.Max == 0 && bar.Value > top {
			top = bar.Value
		}
	}
	if c.Max == 0 {
		top = niceMax(top)
	}
	var b strings.Builder
	svgStart(&b, c.ID, c.Title, c.YLabel+" by "+c.XLabel+": "+strings.Join(desc, "; "), chartW, chartH)
	axes(&b, c.XLabel, c.YLabel, 0, top, format)
	plotW := chartW - chartLeft - chartRight
	plotH := chartH - chartTop - chartBottom
	if n := len(c.Bars); n > 0 {
		slot := plotW / float64(n)
		bw := slot * 0.7
		for i, bar := range c.Bars {
			h := 0.0
			if top > 0 {
				h = math.Max(0, math.Min(1, bar.Value/top)) * plotH
			}
			x := chartLeft + slot*float64(i) + (slot-bw)/2
			y := chartTop + plotH - h
			cls := "bar"
			if bar.Class != "" {
				cls += " " + bar.Class
			}
			fmt.Fprintf(&b, `<rect class="%s" x="%s" y="%s" width="%s" height="%s"><title>%s: %s</title></rect>`,
				esc(cls), num(x), num(y), num(bw), num(h), esc(bar.Label), esc(format(bar.Value)))
			fmt.Fprintf(&b, `<text class="bar-value" x="%s" y="%s" text-anchor="middle">%s</text>`, num(x+bw/2), num(y-4), esc(format(bar.Value)))
			fmt.Fprintf(&b, `<text class="tick" x="%s" y="%s" text-anchor="middle">%s</text>`, num(x+bw/2), num(chartTop+plotH+16), esc(bar.Label))
		}
	}
	b.WriteString(`</svg>`)
	return b.String()
}

// Component renders the chart inside a templ page.
func (c BarChart) Component() templ.Component { return writeSVG(c.SVG()) }

// SVG renders the line chart; missing points break the line.
func (c LineChart) SVG() string {
	format := c.Format
	if format == nil {
		format = intFormat
	}
	lo, hi := c.Min, c.Max
	if hi <= lo {
		lo, hi = 0, 0
		for _, p := range c.Points {
			if !p.Missing && p.Y > hi {
				hi = p.Y
			}
		}
		hi = niceMax(hi)
	}
	var desc []string
	for _, p := range c.Points {
		if p.Missing {
			desc = append(desc, p.Label+": none")
		} else {
			desc = append(desc, p.Label+": "+format(p.Y))
		}
	}
	var b strings.Builder
	svgStart(&b, c.ID, c.Title, c.YLabel+" by "+c.XLabel+": "+strings.Join(desc, "; "), chartW, chartH)
	axes(&b, c.XLabel, c.YLabel, lo, hi, format)
	plotW := chartW - chartLeft - chartRight
	plotH := chartH - chartTop - chartBottom
	n := len(c.Points)
	xAt := func(i int) float64 {
		if n == 1 {
			return chartLeft + plotW/2
		}
		return chartLeft + plotW*float64(i)/float64(n-1)
	}
	yAt := func(v float64) float64 {
		f := (v - lo) / (hi - lo)
		return chartTop + plotH - math.Max(0, math.Min(1, f))*plotH
	}
	every := max(c.TickEvery, 1)
	var path strings.Builder
	pen := false
	for i, p := range c.Points {
		if i%every == 0 {
			fmt.Fprintf(&b, `<text class="tick" x="%s" y="%s" text-anchor="middle">%s</text>`, num(xAt(i)), num(chartTop+plotH+16), esc(p.Label))
		}
		if p.Missing {
			pen = false
			continue
		}
		cmd := "L"
		if !pen {
			cmd = "M"
		}
		fmt.Fprintf(&path, "%s%s %s ", cmd, num(xAt(i)), num(yAt(p.Y)))
		pen = true
	}
	if path.Len() > 0 {
		fmt.Fprintf(&b, `<path class="line" fill="none" d="%s"/>`, strings.TrimSpace(path.String()))
	}
	for i, p := range c.Points {
		if !p.Missing {
			fmt.Fprintf(&b, `<circle class="dot" cx="%s" cy="%s" r="2.5"><title>%s: %s</title></circle>`,
				num(xAt(i)), num(yAt(p.Y)), esc(p.Label), esc(format(p.Y)))
		}
	}
	b.WriteString(`</svg>`)
	return b.String()
}

// Component renders the chart inside a templ page.
func (c LineChart) Component() templ.Component { return writeSVG(c.SVG()) }

// SVG renders the heatmap: one square per cell, shaded by value, with its
// text printed inside so the reading never depends on colour alone.
func (c Heatmap) SVG() string {
	format := c.Format
	if format == nil {
		format = intFormat
	}
	top := c.Max
	if top == 0 {
		for _, row := range c.Cells {
			for _, v := range row {
				if !math.IsNaN(v) && v > top {
					top = v
				}
			}
		}
	}
	cell := 36.0
	left, topPad := 130.0, 110.0
	w := left + cell*float64(len(c.Cols)) + 16
	h := topPad + cell*float64(len(c.Rows)) + 16
	// Wide enough for the title (14 px bold runs about 8.5 px a character).
	w, h = math.Max(math.Max(w, 320), 8.5*float64(len([]rune(c.Title)))+24), math.Max(h, 200)
	var desc []string
	text := func(r, col int) string {
		if c.Text != nil {
			return c.Text[r][col]
		}
		if math.IsNaN(c.Cells[r][col]) {
			return ""
		}
		return format(c.Cells[r][col])
	}
	for r, name := range c.Rows {
		var parts []string
		for col, cn := range c.Cols {
			parts = append(parts, cn+" "+text(r, col))
		}
		desc = append(desc, c.YLabel+" "+name+": "+strings.Join(parts, ", "))
	}
	var b strings.Builder
	svgStart(&b, c.ID, c.Title, strings.Join(desc, "; "), w, h)
	fmt.Fprintf(&b, `<text class="axis-label" x="%s" y="40" text-anchor="middle">%s</text>`, num(left+cell*float64(len(c.Cols))/2), esc(c.XLabel))
	fmt.Fprintf(&b, `<text class="axis-label" x="8" y="%s">%s</text>`, num(topPad-8), esc(c.YLabel))
	for col, name := range c.Cols {
		x := left + cell*float64(col) + cell/2
		fmt.Fprintf(&b, `<text class="tick" x="%s" y="%s" text-anchor="start" transform="rotate(-50 %s %s)">%s</text>`,
			num(x), num(topPad-6), num(x), num(topPad-6), esc(name))
	}
	for r, name := range c.Rows {
		y := topPad + cell*float64(r)
		fmt.Fprintf(&b, `<text class="tick" x="%s" y="%s" text-anchor="end">%s</text>`, num(left-6), num(y+cell/2+4), esc(name))
		for col := range c.Cols {
			v := c.Cells[r][col]
			x := left + cell*float64(col)
			op := 0.0
			if top > 0 && !math.IsNaN(v) {
				op = math.Max(0, math.Min(1, v/top))
			}
			t := text(r, col)
			fmt.Fprintf(&b, `<rect class="cell-bg" x="%s" y="%s" width="%s" height="%s"/>`, num(x), num(y), num(cell), num(cell))
			fmt.Fprintf(&b, `<rect class="cell" x="%s" y="%s" width="%s" height="%s" fill-opacity="%s"><title>%s %s, %s %s: %s</title></rect>`,
				num(x), num(y), num(cell), num(cell), strconv.FormatFloat(op, 'f', 3, 64),
				esc(c.YLabel), esc(name), esc(c.XLabel), esc(c.Cols[col]), esc(t))
			cls := "cell-text"
			if op > 0.55 {
				cls += " on-dark"
			}
			fmt.Fprintf(&b, `<text class="%s" x="%s" y="%s" text-anchor="middle">%s</text>`, cls, num(x+cell/2), num(y+cell/2+4), esc(t))
		}
	}
	b.WriteString(`</svg>`)
	return b.String()
}

// Component renders the heatmap inside a templ page.
func (c Heatmap) Component() templ.Component { return writeSVG(c.SVG()) }
