package main

import (
	"bytes"
	"fmt"
	"image"
	"image/jpeg"
	"image/png"
	"math"
	"math/rand/v2"
)

// The demo's images are sorting-line camera frames drawn here, so the demo
// ships no photographs (and so no people) and needs no download. Each frame
// shows one object of a known leaf label on a conveyor belt; that label is
// the item's truth for gold items and for the simulated crowd.

const (
	demoWidth  = 320
	demoHeight = 240
	railWidth  = 18 // the belt's side rails, fixed to the camera
)

// demoScene is what lies on the belt: the object to label, and sometimes a
// second one partly covering it. A re-shot frame draws the same scene with
// a different demoShot.
type demoScene struct {
	label    string
	main     objectPose
	occluder *objectPose
	otherKey string
	beltSeed uint64
	phase    float64 // where the belt's slats are
	// The plant's lamps: a gradient of strength light towards lightAngle,
	// and a pool of light of strength lamp around (lampX, lampY). They
	// belong to the scene, so a re-shot frame keeps them.
	light, lightAngle  float64
	lamp, lampX, lampY float64
}

// objectPose places an object: centre, rotation and half-sizes in pixels;
// variant picks its colourway and seed its texture.
type objectPose struct {
	cx, cy, angle float64
	half, width   float64 // half-length along the object, half-width across
	variant       int
	seed          uint64
}

// demoShot is one exposure of a scene: the belt moved a few pixels, the
// light changed, the sensor noise is new, and the file was encoded again.
type demoShot struct {
	dx, dy     float64
	brightness float64
	noiseSeed  uint64
	png        bool
	quality    int // JPEG quality
}

// widthRatio is each label's usual width for its length: bottles are slim,
// sheets nearly square.
var widthRatio = map[string]float64{
	"pet-bottle": 0.38, "hdpe-container": 0.6, "plastic-film": 0.85, "polystyrene": 0.7,
	"aluminium-can": 0.5, "steel-can": 0.72, "aerosol-can": 0.36,
	"cardboard": 0.72, "newspaper": 0.78, "office-paper": 0.74, "paper-cup": 0.62,
	"clear-glass": 0.33, "green-glass": 0.33, "brown-glass": 0.35, "residual-waste": 0.8,
}

// newDemoScene draws a scene's layout from rng. others are the labels an
// occluding object may have.
func newDemoScene(rng *rand.Rand, label string, others []string) demoScene {
	sc := demoScene{label: label, beltSeed: rng.Uint64(), phase: rng.Float64() * 40,
		light: 0.3 + 0.7*rng.Float64(), lightAngle: rng.Float64() * 2 * math.Pi,
		lamp: rng.Float64() * 0.9, lampX: rng.Float64() * demoWidth, lampY: rng.Float64() * demoHeight}
	sc.main = randomPose(rng, label, 62+rng.Float64()*38)
	// One frame in eight has the object half under a rail or off the edge.
	if rng.IntN(8) == 0 {
		if rng.IntN(2) == 0 {
			sc.main.cy = railWidth + rng.Float64()*12
		} else {
			sc.main.cx = demoWidth - 20 - rng.Float64()*20
		}
	}
	if rng.IntN(10) < 3 && len(others) > 0 {
		sc.otherKey = others[rng.IntN(len(others))]
		o := randomPose(rng, sc.otherKey, 34+rng.Float64()*16)
		// Put it over one end of the main object so most of that stays visible.
		a := rng.Float64() * 2 * math.Pi
		o.cx = sc.main.cx + math.Cos(a)*sc.main.half*0.95
		o.cy = sc.main.cy + math.Sin(a)*sc.main.width*0.95
		sc.occluder = &o
	}
	return sc
}

func randomPose(rng *rand.Rand, label string, half float64) objectPose {
	ratio := widthRatio[label]
	if ratio == 0 {
		ratio = 0.6
	}
	return objectPose{
		cx:      demoWidth*0.3 + rng.Float64()*demoWidth*0.4,
		cy:      demoHeight*0.35 + rng.Float64()*demoHeight*0.3,
		angle:   rng.Float64() * math.Pi,
		half:    half,
		width:   half * ratio * (0.9 + 0.2*rng.Float64()),
		variant: rng.IntN(3),
		seed:    rng.Uint64(),
	}
}

// newDemoShot draws how a frame is exposed; a first shot is centred.
func newDemoShot(rng *rand.Rand, reshot bool) demoShot {
	sh := demoShot{
		brightness: 0.9 + 0.2*rng.Float64(),
		noiseSeed:  rng.Uint64(),
		quality:    80 + rng.IntN(12),
		png:        rng.IntN(8) == 0,
	}
	if reshot {
		sh.dx, sh.dy = (rng.Float64()-0.5)*6, (rng.Float64()-0.5)*6
		sh.quality = 65 + rng.IntN(30)
		sh.png = false
	}
	return sh
}

// rgb is a colour with float channels in 0..255.
type rgb struct{ r, g, b float64 }

func (c rgb) scale(f float64) rgb { return rgb{c.r * f, c.g * f, c.b * f} }

func (c rgb) mix(d rgb, t float64) rgb {
	return rgb{c.r + (d.r-c.r)*t, c.g + (d.g-c.g)*t, c.b + (d.b-c.b)*t}
}

// canvas is a float frame buffer, so layers blend without rounding.
type canvas struct{ pix []rgb }

func (c *canvas) at(x, y int) *rgb { return &c.pix[y*demoWidth+x] }

// shapeFunc colours an object at (s, t): s runs along it from -1 to 1 and t
// across it from -1 to 1. It returns the colour and its opacity (0 = the
// point is not on the object).
type shapeFunc func(s, t float64) (rgb, float64)

// draw renders the scene as one shot.
func (sc demoScene) draw(sh demoShot) *image.RGBA {
	c := &canvas{pix: make([]rgb, demoWidth*demoHeight)}
	drawBelt(c, sc.beltSeed, sc.phase, sh.dx, sh.dy)
	paintObject(c, sc.main, sh, shapeOf(sc.label, sc.main))
	if sc.occluder != nil {
		paintObject(c, *sc.occluder, sh, shapeOf(sc.otherKey, *sc.occluder))
	}
	drawRails(c)
	return expose(c, sc, sh)
}

// drawBelt fills the frame with dark rubber: a fine grain, the slats that
// cross the belt every 40 pixels, and stains.
func drawBelt(c *canvas, seed uint64, phase, dx, dy float64) {
	base := rgb{58, 60, 63}
	// The belt carries the objects, so a re-shot frame moves the slats and
	// stains with them.
	off := 40 - int(math.Floor(phase+dx))%40 + 40
	for y := range demoHeight {
		for x := range demoWidth {
			v := 0.96 + 0.08*hashUnit(seed, uint64(x/2), uint64(y/2))
			switch p := (x + off) % 40; {
			case p < 3:
				v *= 0.72
			case p < 5:
				v *= 1.12
			}
			*c.at(x, y) = base.scale(v)
		}
	}
	// Wet patches and grime: broad, soft stains that differ from frame to
	// frame as the belt moves on.
	for k := range uint64(4) {
		sx, sy := hashUnit(seed, k, 10)*demoWidth+dx, hashUnit(seed, k, 11)*demoHeight+dy
		rx, ry := 30+50*hashUnit(seed, k, 12), 25+40*hashUnit(seed, k, 13)
		f := 0.55 + 0.9*hashUnit(seed, k, 14)
		for y := max(0, int(sy-ry)); y < min(demoHeight, int(sy+ry)); y++ {
			for x := max(0, int(sx-rx)); x < min(demoWidth, int(sx+rx)); x++ {
				d := sq((float64(x)-sx)/rx) + sq((float64(y)-sy)/ry)
				if d < 1 {
					px := c.at(x, y)
					*px = px.scale(1 + (f-1)*(1-d))
				}
			}
		}
	}
}

// drawRails draws the steel side rails last, so objects that reach the belt
// edge are cut off as a real camera sees them.
func drawRails(c *canvas) {
	steel := rgb{150, 152, 156}
	for y := range demoHeight {
		if y >= railWidth && y < demoHeight-railWidth {
			continue
		}
		edge := min(y, demoHeight-1-y)
		for x := range demoWidth {
			v := 1.0
			if edge > railWidth-3 {
				v = 0.55 // the rail's lip casts a line of shadow
			}
			if (x+7)%52 < 5 && edge > 5 && edge < 11 {
				v = 0.7 // bolts
			}
			*c.at(x, y) = steel.scale(v * (0.95 + 0.05*math.Sin(float64(x)*0.3)))
		}
	}
}

// paintObject blends f over the canvas in the object's frame, shifted by
// the shot.
func paintObject(c *canvas, p objectPose, sh demoShot, f shapeFunc) {
	cx, cy := p.cx+sh.dx, p.cy+sh.dy
	r := math.Hypot(p.half, p.width) + 2
	cos, sin := math.Cos(p.angle), math.Sin(p.angle)
	for y := max(0, int(cy-r)); y < min(demoHeight, int(cy+r)+1); y++ {
		for x := max(0, int(cx-r)); x < min(demoWidth, int(cx+r)+1); x++ {
			dx, dy := float64(x)-cx, float64(y)-cy
			s := (dx*cos + dy*sin) / p.half
			t := (-dx*sin + dy*cos) / p.width
			if s < -1.05 || s > 1.05 || t < -1.25 || t > 1.25 {
				continue
			}
			col, a := f(s, t)
			if a <= 0 {
				continue
			}
			px := c.at(x, y)
			*px = px.mix(col, min(a, 1))
		}
	}
}

// expose applies the light (the scene's lamps, the shot's exposure), sensor
// noise, and rounds to 8 bits.
func expose(c *canvas, sc demoScene, sh demoShot) *image.RGBA {
	img := image.NewRGBA(image.Rect(0, 0, demoWidth, demoHeight))
	gx, gy := math.Cos(sc.lightAngle)*sc.light/demoWidth, math.Sin(sc.lightAngle)*sc.light/demoHeight
	// The pool of light is a Gaussian, which separates into a row and a
	// column factor.
	var spotX [demoWidth]float64
	for x := range demoWidth {
		spotX[x] = math.Exp(-sq(float64(x)-sc.lampX) / (2 * sq(demoWidth*0.35)))
	}
	for y := range demoHeight {
		spotY := sc.lamp * math.Exp(-sq(float64(y)-sc.lampY)/(2*sq(demoHeight*0.35)))
		fy := float64(y) - demoHeight/2
		for x := range demoWidth {
			px := *c.at(x, y)
			fx := float64(x) - demoWidth/2
			l := sh.brightness * (1 + gx*fx + gy*fy + spotY*spotX[x])
			// One hash gives three uniform draws; their sum is close
			// enough to Gaussian sensor noise.
			h := hashBits(sh.noiseSeed, uint64(x), uint64(y))
			n := (float64(h&0xffff)+float64(h>>16&0xffff)+float64(h>>32&0xffff))/65536 - 1.5
			n *= 9
			o := img.PixOffset(x, y)
			img.Pix[o] = clamp8(px.r*l + n)
			img.Pix[o+1] = clamp8(px.g*l + n)
			img.Pix[o+2] = clamp8(px.b*l + n)
			img.Pix[o+3] = 255
		}
	}
	return img
}

func clamp8(v float64) uint8 {
	switch {
	case v <= 0:
		return 0
	case v >= 255:
		return 255
	}
	return uint8(v + 0.5)
}

// hashUnit is a stateless uniform draw in [0,1) for textures and noise.
func hashUnit(seed, a, b uint64) float64 { return float64(hashBits(seed, a, b)>>11) / (1 << 53) }

// hashBits mixes a seed and two keys with the SplitMix64 finaliser.
func hashBits(seed, a, b uint64) uint64 {
	h := seed ^ 0x9e3779b97f4a7c15
	for _, k := range [2]uint64{a, b} {
		h += k + 0x9e3779b97f4a7c15
		h = (h ^ (h >> 30)) * 0xbf58476d1ce4e5b9
		h = (h ^ (h >> 27)) * 0x94d049bb133111eb
		h ^= h >> 31
	}
	return h
}

// cylinder is the brightness across a round object lit from one side, with a
// specular stripe: what makes a can or bottle read as round.
func cylinder(t, shine float64) float64 {
	body := 0.55 + 0.45*math.Sqrt(math.Max(0, 1-t*t))
	return body + shine*math.Exp(-sq((t+0.45)/0.13))
}

func sq(x float64) float64 { return x * x }

// bottleHalfWidth is a bottle's outline: body, shoulder, neck, and a lip.
// It returns 0 beyond the bottle.
func bottleHalfWidth(s, neck float64) float64 {
	switch {
	case s < -1 || s > 1:
		return 0
	case s < -0.9:
		return math.Sqrt(1 - sq((s+0.9)/0.1)) // rounded base
	case s < 0.3:
		return 1
	case s < 0.6:
		k := (s - 0.3) / 0.3
		return 1 - (1-neck)*(0.5-0.5*math.Cos(k*math.Pi))
	default:
		return neck
	}
}

// shapeOf returns how an object of a leaf label looks. Keys not drawn here
// (a taxonomy someone edited) fall back to a plain grey block.
func shapeOf(key string, p objectPose) shapeFunc {
	v, seed := p.variant, p.seed
	switch key {
	case "pet-bottle":
		tint := []rgb{{205, 228, 240}, {190, 232, 205}, {225, 225, 230}}[v]
		capc := []rgb{{30, 80, 200}, {240, 240, 240}, {200, 30, 30}}[v]
		band := []rgb{{220, 40, 40}, {40, 150, 60}, {250, 200, 40}}[v]
		return func(s, t float64) (rgb, float64) {
			hw := bottleHalfWidth(s, 0.38)
			if math.Abs(t) > hw {
				return rgb{}, 0
			}
			if s > 0.86 {
				return capc.scale(cylinder(t/hw, 0.2)), 1
			}
			crease := 0.9 + 0.1*math.Sin(s*23+t*4+float64(seed%7))
			if s > -0.35 && s < 0.1 && v != 2 {
				return band.scale(cylinder(t, 0.3) * crease), 0.95
			}
			a := 0.45 + 0.35*sq(t/hw)
			return tint.scale(cylinder(t/hw, 0.6) * crease), a
		}
	case "hdpe-container":
		body := []rgb{{238, 236, 226}, {240, 130, 30}, {40, 90, 190}}[v]
		return func(s, t float64) (rgb, float64) {
			if s > 0.8 {
				if math.Abs(t) < 0.3 && s < 1 {
					return body.scale(0.8), 1 // spout
				}
				return rgb{}, 0
			}
			ss := (s + 0.1) / 0.9
			if math.Pow(math.Abs(ss), 5)+math.Pow(math.Abs(t), 5) > 1 {
				return rgb{}, 0
			}
			if sq((ss-0.45)/0.28)+sq((t-0.45)/0.25) < 1 {
				return rgb{}, 0 // the handle's hole shows the belt
			}
			return body.scale(0.8 + 0.2*math.Sqrt(math.Max(0, 1-t*t))), 1
		}
	case "plastic-film":
		tint := []rgb{{235, 235, 240}, {180, 210, 245}, {240, 200, 215}}[v]
		ph := [3]float64{hashUnit(seed, 1, 0) * 6, hashUnit(seed, 2, 0) * 6, hashUnit(seed, 3, 0) * 6}
		return func(s, t float64) (rgb, float64) {
			r, th := math.Hypot(s, t), math.Atan2(t, s)
			edge := 0.82 + 0.1*math.Sin(3*th+ph[0]) + 0.07*math.Sin(5*th+ph[1]) + 0.04*math.Sin(11*th+ph[2])
			if r > edge {
				return rgb{}, 0
			}
			wr := math.Abs(math.Sin(th*7+r*14+ph[1]) * math.Sin(r*9+ph[2]))
			shade := 0.8 + 0.4*wr
			return tint.scale(shade), 0.35 + 0.3*wr
		}
	case "polystyrene":
		return func(s, t float64) (rgb, float64) {
			jag := 0.93 + 0.07*hashUnit(seed, uint64((s+2)*9), uint64((t+2)*9))
			if math.Abs(s) > jag || math.Abs(t) > jag {
				return rgb{}, 0
			}
			bead := 0.9 + 0.14*hashUnit(seed, uint64((s+2)*60), uint64((t+2)*40))
			rim := 1.0
			if math.Abs(t) > 0.8 || math.Abs(s) > 0.85 {
				rim = 0.85
			}
			return rgb{246, 246, 240}.scale(bead * rim), 1
		}
	case "aluminium-can":
		band := []rgb{{200, 25, 35}, {30, 70, 190}, {30, 160, 80}}[v]
		return func(s, t float64) (rgb, float64) {
			waist := 1 - 0.28*math.Exp(-sq((s-0.1)/0.25)) // crushed in the middle
			if math.Abs(s) > 1 || math.Abs(t) > waist {
				return rgb{}, 0
			}
			tn := t / waist
			sh := cylinder(tn, 0.9)
			if s > 0.85 || s < -0.88 {
				return rgb{175, 178, 185}.scale(sh * (0.8 + 0.2*math.Cos(s*60))), 1 // rims
			}
			if s > -0.5 && s < 0.55 {
				return rgb{205, 208, 214}.mix(band, 0.75).scale(sh), 1
			}
			return rgb{205, 208, 214}.scale(sh), 1
		}
	case "steel-can":
		label := []rgb{{235, 215, 120}, {200, 60, 40}, {120, 170, 90}}[v]
		return func(s, t float64) (rgb, float64) {
			if math.Abs(s) > 1 || math.Abs(t) > 1 {
				return rgb{}, 0
			}
			ridge := 0.82 + 0.18*math.Sin(s*45)
			if s > -0.6 && s < 0.6 && v != 1 || s > -0.3 && s < 0.3 {
				text := 1.0
				if math.Mod((s+1)*12, 1) < 0.25 && math.Abs(t) < 0.5 {
					text = 0.55
				}
				return label.scale(cylinder(t, 0.25) * text), 1
			}
			return rgb{160, 160, 156}.scale(cylinder(t, 0.5) * ridge), 1
		}
	case "aerosol-can":
		body := []rgb{{35, 60, 170}, {235, 235, 235}, {190, 30, 60}}[v]
		return func(s, t float64) (rgb, float64) {
			var hw float64
			switch {
			case s < -1 || s > 1:
				return rgb{}, 0
			case s < 0.55:
				hw = 1
			case s < 0.82:
				hw = math.Sqrt(math.Max(0, 1-sq((s-0.55)/0.27)))
			default:
				if math.Abs(t) < 0.22 {
					return rgb{20, 20, 20}, 1 // nozzle
				}
				return rgb{}, 0
			}
			if math.Abs(t) > hw {
				return rgb{}, 0
			}
			if s > 0.55 {
				return rgb{200, 202, 208}.scale(cylinder(t/hw, 0.8)), 1 // domed top
			}
			return body.scale(cylinder(t, 0.7)), 1
		}
	case "cardboard":
		return func(s, t float64) (rgb, float64) {
			if math.Abs(s) > 1 || math.Abs(t) > 1 || s+t > 1.7 { // one torn corner
				return rgb{}, 0
			}
			corr := 0.88 + 0.12*math.Sin(s*p.half*0.9)
			col := rgb{168, 122, 72}
			if math.Abs(t-0.1*float64(v)) < 0.1 {
				col = rgb{205, 178, 120} // packing tape
			}
			if v == 2 && s > 0.2 && s < 0.6 && t > -0.7 && t < -0.3 {
				col = rgb{60, 40, 30} // printed mark
			}
			return col.scale(corr), 1
		}
	case "newspaper":
		return func(s, t float64) (rgb, float64) {
			if math.Abs(s) > 1 || math.Abs(t) > 1 {
				return rgb{}, 0
			}
			col := rgb{196, 194, 186}
			u := (s + 1) * p.half
			w := (t + 1) * p.width
			switch {
			case v == 0 && s > 0.1 && s < 0.8 && t > -0.8 && t < 0:
				col = rgb{95, 95, 95} // a photograph
			case math.Mod(w, 5) < 1.6 && math.Mod(u, 42) > 3 && hashUnit(seed, uint64(w/5), uint64(u/9)) > 0.15:
				col = rgb{70, 70, 72} // columns of small type
			}
			fold := 1 - 0.25*math.Exp(-sq(s/0.04))
			return col.scale(fold), 1
		}
	case "office-paper":
		return func(s, t float64) (rgb, float64) {
			if math.Abs(s) > 1 || math.Abs(t) > 1 {
				return rgb{}, 0
			}
			col := rgb{242, 242, 240}
			w := (t + 1) * p.width
			if v != 2 && s > -0.8 && s < 0.75-0.5*hashUnit(seed, uint64(w/8), 1) && math.Mod(w, 8) < 1.5 && t > -0.85 && t < 0.85 {
				col = rgb{30, 30, 35} // typed lines with a margin
			}
			return col.scale(0.92 + 0.08*s), 1
		}
	case "paper-cup":
		cup := []rgb{{244, 242, 236}, {190, 150, 105}, {240, 240, 240}}[v]
		band := []rgb{{30, 110, 60}, {120, 40, 30}, {220, 90, 20}}[v]
		return func(s, t float64) (rgb, float64) {
			hw := 0.62 + 0.38*(s+1)/2 // wider at the rim
			if math.Abs(s) > 1 || math.Abs(t) > hw {
				return rgb{}, 0
			}
			tn := t / hw
			if s > 0.88 {
				return rgb{250, 250, 250}.scale(cylinder(tn, 0.3) * 0.85), 1 // lid rim
			}
			if s > -0.2 && s < 0.3 {
				return band.scale(cylinder(tn, 0.3)), 1
			}
			return cup.scale(cylinder(tn, 0.3)), 1
		}
	case "clear-glass", "green-glass", "brown-glass":
		tint, alpha := rgb{222, 236, 236}, 0.32
		switch key {
		case "green-glass":
			tint, alpha = rgb{25, 95, 40}, 0.85
		case "brown-glass":
			tint, alpha = rgb{120, 62, 18}, 0.85
		}
		neck := 0.34 + 0.04*float64(v)
		return func(s, t float64) (rgb, float64) {
			hw := bottleHalfWidth(s, neck)
			if math.Abs(t) > hw {
				return rgb{}, 0
			}
			tn := t / hw
			sh := cylinder(tn, 1.1)
			if s > 0.9 {
				return tint.scale(0.7), 1 // thick lip
			}
			return tint.scale(sh), math.Min(1, alpha+0.5*sq(tn)*(1-alpha))
		}
	case "residual-waste":
		type piece struct {
			s, t, rs, rt float64
			col          rgb
		}
		dull := []rgb{{55, 42, 35}, {70, 70, 74}, {40, 45, 70}, {85, 80, 50}, {100, 60, 70}, {30, 30, 30}}
		var ps []piece
		for i := range 7 {
			k := uint64(i)
			ps = append(ps, piece{
				s: hashUnit(seed, k, 1)*1.3 - 0.65, t: hashUnit(seed, k, 2)*1.3 - 0.65,
				rs: 0.25 + 0.3*hashUnit(seed, k, 3), rt: 0.25 + 0.3*hashUnit(seed, k, 4),
				col: dull[int(hashUnit(seed, k, 5)*float64(len(dull)))],
			})
		}
		return func(s, t float64) (rgb, float64) {
			for i := len(ps) - 1; i >= 0; i-- {
				q := ps[i]
				if sq((s-q.s)/q.rs)+sq((t-q.t)/q.rt) < 1 {
					weave := 0.85 + 0.15*math.Sin(s*p.half*1.3)*math.Sin(t*p.width*1.3)
					return q.col.scale(weave), 1
				}
			}
			return rgb{}, 0
		}
	}
	return func(s, t float64) (rgb, float64) {
		if math.Abs(s) > 1 || math.Abs(t) > 1 {
			return rgb{}, 0
		}
		return rgb{128, 128, 128}, 1
	}
}

// demoImage is one encoded frame ready to import.
type demoImage struct {
	name  string
	data  []byte
	label string // the truth: the leaf key of the main object
	dupOf int    // index of the frame this one re-shoots, or -1
}

// demoPlan lists what each frame shows: frame i has truth labels[i]; a frame
// with dupOf[i] >= 0 re-shoots that earlier frame's scene.
type demoPlan struct {
	seed   uint64
	labels []string
	dupOf  []int
}

// renderFrame draws and encodes frame i of the plan. It depends only on the
// plan and i, so frames can be drawn in any order and in parallel.
func (pl demoPlan) renderFrame(i int) (demoImage, error) {
	src := i
	if pl.dupOf[i] >= 0 {
		src = pl.dupOf[i]
	}
	rng := rand.New(rand.NewPCG(pl.seed, uint64(src)))
	sc := newDemoScene(rng, pl.labels[src], pl.labels)
	sh := newDemoShot(rng, false)
	if src != i {
		sh = newDemoShot(rand.New(rand.NewPCG(pl.seed, uint64(i)|1<<40)), true)
	}
	img := sc.draw(sh)
	var buf bytes.Buffer
	ext := "jpg"
	if sh.png {
		ext = "png"
		if err := png.Encode(&buf, img); err != nil {
			return demoImage{}, fmt.Errorf("encode demo frame %d: %w", i, err)
		}
	} else if err := jpeg.Encode(&buf, img, &jpeg.Options{Quality: sh.quality}); err != nil {
		return demoImage{}, fmt.Errorf("encode demo frame %d: %w", i, err)
	}
	return demoImage{name: demoFrameName(i, ext), data: buf.Bytes(), label: pl.labels[i], dupOf: pl.dupOf[i]}, nil
}

// demoFrameName names frame i; the demo finds the frame (and so the truth)
// of an item again from this name when it is run a second time.
func demoFrameName(i int, ext string) string { return fmt.Sprintf("belt-%04d.%s", i, ext) }

// demoFrameIndex reads the frame number back from an item's name.
func demoFrameIndex(name string) (int, bool) {
	var i int
	var ext string
	if n, err := fmt.Sscanf(name, "belt-%d.%s", &i, &ext); err != nil || n != 2 || i < 0 {
		return 0, false
	}
	return i, true
}
