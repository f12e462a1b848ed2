package report

import (
	"bytes"
	"math"
	"path/filepath"
	"testing"
	"time"

	"golang.org/x/net/html"

	"gaitrig/record"
)

// TestBeltEndsOf: the belt's rollers from the manifest's terrain, laid out
// from its start along each segment's slope (worked by hand: 2 m at
// 0.1 rad, then the 3 m belt level).
func TestBeltEndsOf(t *testing.T) {
	p := &record.Plant{Terrain: record.Terrain{StartM: [2]float64{-1, 0.5}, Segments: []record.TerrainSegment{
		{LengthM: 2, SlopeRad: 0.1}, {LengthM: 3, Belt: true}, {LengthM: 10}}}}
	b := beltEndsOf(p)
	if b == nil {
		t.Fatal("no belt found")
	}
	rear := [2]float64{-1 + 2*math.Cos(0.1), 0.5 + 2*math.Sin(0.1)}
	front := [2]float64{rear[0] + 3, rear[1]}
	if math.Hypot(b.rear[0]-rear[0], b.rear[1]-rear[1]) > 1e-12 || math.Hypot(b.front[0]-front[0], b.front[1]-front[1]) > 1e-12 {
		t.Errorf("belt ends %v %v, want %v %v", b.rear, b.front, rear, front)
	}
	p.Terrain.Segments[1].Belt = false
	if beltEndsOf(p) != nil || beltEndsOf(nil) != nil {
		t.Error("a belt where there is none")
	}
}

// TestStickFiguresOnTheBelt: on a treadmill run the heel-strike strip
// places each figure at its true place relative to the middle of the belt
// and draws the whole belt under it: in Chromium's DOM the strip of the
// run on a belt has, per figure, the belt's return run and its two rollers
// (three paths) more than the same run on fixed ground, its slots are wide
// enough for the whole belt, and the caption says where the figures stand.
func TestStickFiguresOnTheBelt(t *testing.T) {
	bin := findChromium(t)
	paths := func(belt bool) (int, int, string) {
		r := makeSynthRun(synthOpts{durationS: 4, hz: 500, patchMu: 0.6})
		if belt {
			// The first 2.4 m become a belt: the synthetic walker's heel
			// strikes are on it, the last just past its front end.
			r.m.Plant.Terrain.Segments[0].Belt = true
		}
		dir := filepath.Join(t.TempDir(), "run")
		writeSynthFolder(t, dir, r, true)
		if err := WriteHTML(dir); err != nil {
			t.Fatal(err)
		}
		abs, err := filepath.Abs(filepath.Join(dir, HTMLFile))
		if err != nil {
			t.Fatal(err)
		}
		out := runChromium(t, bin, 90*time.Second, "--dump-dom", "file://"+abs)
		doc, err := html.Parse(bytes.NewReader(out))
		if err != nil {
			t.Fatal(err)
		}
		n := -1
		var walk func(*html.Node)
		walk = func(x *html.Node) {
			if x.Type == html.ElementNode && x.Data == "svg" {
				for _, a := range x.Attr {
					if a.Key == "id" && a.Val == "plot-heel-strikes" {
						n = countElements(x, "path")
					}
				}
			}
			for c := x.FirstChild; c != nil; c = c.NextSibling {
				walk(c)
			}
		}
		walk(doc)
		if n < 0 {
			t.Fatalf("belt %v: no heel-strike strip in the browser DOM", belt)
		}
		return n, len(r.steps), textOf(doc)
	}
	fixed, steps, _ := paths(false)
	onBelt, steps2, text := paths(true)
	if steps != steps2 || steps == 0 {
		t.Fatalf("%d and %d steps", steps, steps2)
	}
	shown := min(steps, maxStickFigures)
	if onBelt-fixed != 3*shown {
		t.Errorf("the strip on the belt has %d paths, on fixed ground %d: want 3 more per figure (%d figures)", onBelt, fixed, shown)
	}
	if !bytes.Contains([]byte(text), []byte("at its place on the belt")) {
		t.Error("the caption does not say the figures stand at their place on the belt")
	}
	t.Logf("%d figures: %d paths on fixed ground, %d on the belt", shown, fixed, onBelt)
}

// TestStickStripBeltPlacement: a figure on the belt is placed relative to
// the middle of the belt, so two figures at different places on it keep
// their distance along the belt, and the slot holds the whole belt.
func TestStickStripBeltPlacement(t *testing.T) {
	b := &stickBelt{rear: [2]float64{-2, 0}, front: [2]float64{2, 0}}
	mk := func(x float64) stickPose {
		return stickPose{hip: [2]float64{x, 0.9}, feet: [2][2]float64{{x - 0.2, 0}, {x + 0.2, 0}}, belt: b}
	}
	s := newStickStrip([]stickPose{mk(-0.5), mk(0.7)})
	for i, x := range []float64{-0.5, 0.7} {
		o := s.origin(s.poses[i])
		if o != [2]float64{0, 0} || s.poses[i].hip[0]-o[0] != x {
			t.Errorf("figure %d: origin %v, hip %.3g m from it, want the belt middle and %.3g", i, o, s.poses[i].hip[0]-o[0], x)
		}
	}
	if s.slotW() < 4 {
		t.Errorf("slot %.3g m wide cannot hold the 4 m belt", s.slotW())
	}
	if plain := newStickStrip([]stickPose{{hip: [2]float64{0, 0.9}, feet: [2][2]float64{{-0.2, 0}, {0.2, 0}}}}); plain.slotW() != 1.6*plain.scale || plain.columns != 1 {
		t.Errorf("fixed ground: slot %.3g, columns %d", plain.slotW(), plain.columns)
	}
}
