package dataset_test

import (
	"bytes"
	"image"
	"image/color"
	"image/gif"
	"image/jpeg"
	"image/png"
	"math"
	"testing"

	"golang.org/x/image/draw"
)

// belt draws a sorting-line camera frame: a grey conveyor belt with ribs and
// a lighting gradient, carrying the objects of one scene. Scenes differ in
// which objects lie where, as consecutive frames of a real belt do.
func belt(w, h int, scene int) *image.RGBA {
	img := image.NewRGBA(image.Rect(0, 0, w, h))
	for y := range h {
		for x := range w {
			v := 70 + 50*float64(x)/float64(w)
			if (y*12/h)%2 == 0 {
				v += 12 // belt ribs
			}
			img.Set(x, y, color.RGBA{uint8(v), uint8(v), uint8(v + 5), 255})
		}
	}
	rnd := uint64(scene)*0x9E3779B97F4A7C15 + 1
	next := func() float64 {
		rnd ^= rnd << 13
		rnd ^= rnd >> 7
		rnd ^= rnd << 17
		return float64(rnd%10000) / 10000
	}
	palette := []color.RGBA{
		{30, 140, 60, 255},   // green PET bottle
		{200, 200, 210, 255}, // aluminium can
		{160, 110, 60, 255},  // cardboard
		{240, 240, 230, 255}, // white film
		{20, 20, 25, 255},    // black residual waste
	}
	for range 3 + scene%3 {
		cx, cy := next()*float64(w), next()*float64(h)
		rx, ry := (0.08+0.2*next())*float64(w), (0.08+0.2*next())*float64(h)
		c := palette[int(next()*float64(len(palette)))]
		round := next() < 0.5
		for y := max(0, int(cy-ry)); y < min(h, int(cy+ry)); y++ {
			for x := max(0, int(cx-rx)); x < min(w, int(cx+rx)); x++ {
				dx, dy := (float64(x)-cx)/rx, (float64(y)-cy)/ry
				if !round || dx*dx+dy*dy <= 1 {
					shade := 1 - 0.3*math.Abs(dx)
					img.Set(x, y, color.RGBA{uint8(float64(c.R) * shade), uint8(float64(c.G) * shade), uint8(float64(c.B) * shade), 255})
				}
			}
		}
	}
	return img
}

func encodePNG(t testing.TB, img image.Image) []byte {
	t.Helper()
	var b bytes.Buffer
	if err := png.Encode(&b, img); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

func encodeJPEG(t testing.TB, img image.Image, quality int) []byte {
	t.Helper()
	var b bytes.Buffer
	if err := jpeg.Encode(&b, img, &jpeg.Options{Quality: quality}); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

func resized(img image.Image, w, h int) image.Image {
	out := image.NewRGBA(image.Rect(0, 0, w, h))
	draw.CatmullRom.Scale(out, out.Bounds(), img, img.Bounds(), draw.Src, nil)
	return out
}

func decode(t testing.TB, b []byte) image.Image {
	t.Helper()
	img, _, err := image.Decode(bytes.NewReader(b))
	if err != nil {
		t.Fatal(err)
	}
	return img
}

func encodeGIF(t testing.TB, img image.Image) []byte {
	t.Helper()
	var b bytes.Buffer
	if err := gif.Encode(&b, img, nil); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}
