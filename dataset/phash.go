package dataset

import (
	"image"
	"image/color"
	"math"
	"math/bits"
	"sort"

	"golang.org/x/image/draw"
)

// phashSize is the side of the grey image the DCT runs on; the hash keeps
// the 8x8 lowest frequencies, which survive resizing and re-encoding.
const phashSize = 32

// dctCos[u][x] = cos((2x+1)uπ/64) scaled by the orthonormal DCT-II factor,
// for the 8 lowest frequencies u.
var dctCos = func() (t [8][phashSize]float64) {
	for u := range 8 {
		a := math.Sqrt(2.0 / phashSize)
		if u == 0 {
			a = math.Sqrt(1.0 / phashSize)
		}
		for x := range phashSize {
			t[u][x] = a * math.Cos(float64(2*x+1)*float64(u)*math.Pi/(2*phashSize))
		}
	}
	return t
}()

// PHash is a 64-bit perceptual hash: the image is averaged down to 32x32
// grey, transformed with a 2-D DCT, and bit i is set when the i-th of the
// 8x8 lowest-frequency coefficients (row-major) lies above their median.
// Resized and re-encoded copies of an image land a few bits apart;
// different scenes land about 32 apart. This is the DCT hash as commonly
// practised (pHash, imagehash); the box average instead of a resampling
// filter is our choice, made for speed on large photos.
func PHash(img image.Image) uint64 {
	g := greyGrid(img)
	var rows [phashSize][8]float64
	for y := range phashSize {
		for u := range 8 {
			var s float64
			for x := range phashSize {
				s += g[y][x] * dctCos[u][x]
			}
			rows[y][u] = s
		}
	}
	var coef [64]float64
	for v := range 8 {
		for u := range 8 {
			var s float64
			for y := range phashSize {
				s += rows[y][u] * dctCos[v][y]
			}
			coef[v*8+u] = s
		}
	}
	sorted := coef
	sort.Float64s(sorted[:])
	median := (sorted[31] + sorted[32]) / 2
	var h uint64
	for i, c := range coef {
		if c > median {
			h |= 1 << uint(i)
		}
	}
	return h
}

// Distance is the Hamming distance between two perceptual hashes.
func Distance(a, b uint64) int { return bits.OnesCount64(a ^ b) }

// greyGrid box-averages the image's luma into a 32x32 grid: every source
// pixel falls in exactly one cell. Images smaller than the grid are first
// enlarged so that no cell is empty.
func greyGrid(img image.Image) *[phashSize][phashSize]float64 {
	b := img.Bounds()
	w, h := b.Dx(), b.Dy()
	if w < phashSize || h < phashSize {
		big := image.NewRGBA(image.Rect(0, 0, max(w, phashSize), max(h, phashSize)))
		draw.NearestNeighbor.Scale(big, big.Bounds(), img, b, draw.Src, nil)
		return greyGrid(big)
	}
	var sum, n [phashSize][phashSize]float64
	col := make([]int, w)
	for x := range w {
		col[x] = x * phashSize / w
	}
	add := func(y int, luma func(x int) float64) {
		r := y * phashSize / h
		for x := range w {
			sum[r][col[x]] += luma(x)
			n[r][col[x]]++
		}
	}
	switch m := img.(type) {
	case *image.YCbCr:
		for y := range h {
			row := m.Y[(y+b.Min.Y-m.Rect.Min.Y)*m.YStride+(b.Min.X-m.Rect.Min.X):]
			add(y, func(x int) float64 { return float64(row[x]) })
		}
	case *image.Gray:
		for y := range h {
			row := m.Pix[m.PixOffset(b.Min.X, b.Min.Y+y):]
			add(y, func(x int) float64 { return float64(row[x]) })
		}
	case *image.RGBA:
		for y := range h {
			row := m.Pix[m.PixOffset(b.Min.X, b.Min.Y+y):]
			add(y, func(x int) float64 { return luma8(row[4*x], row[4*x+1], row[4*x+2]) })
		}
	case *image.NRGBA:
		for y := range h {
			row := m.Pix[m.PixOffset(b.Min.X, b.Min.Y+y):]
			add(y, func(x int) float64 { return luma8(row[4*x], row[4*x+1], row[4*x+2]) })
		}
	case *image.Paletted:
		lum := make([]float64, len(m.Palette))
		for i, c := range m.Palette {
			lum[i] = float64(color.GrayModel.Convert(c).(color.Gray).Y)
		}
		for y := range h {
			row := m.Pix[m.PixOffset(b.Min.X, b.Min.Y+y):]
			add(y, func(x int) float64 { return lum[row[x]] })
		}
	default:
		for y := range h {
			add(y, func(x int) float64 {
				return float64(color.GrayModel.Convert(img.At(b.Min.X+x, b.Min.Y+y)).(color.Gray).Y)
			})
		}
	}
	var g [phashSize][phashSize]float64
	for r := range phashSize {
		for c := range phashSize {
			g[r][c] = sum[r][c] / n[r][c]
		}
	}
	return &g
}

// luma8 uses the ITU-R BT.601 weights, as JPEG's Y channel does, so a PNG
// and its JPEG copy hash alike.
func luma8(r, g, b uint8) float64 {
	return 0.299*float64(r) + 0.587*float64(g) + 0.114*float64(b)
}
