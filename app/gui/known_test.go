package gui

import (
	"encoding/binary"
	"image"
	"image/color"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"slices"
	"testing"

	"fyne.io/fyne/v2/test"
	"google.golang.org/protobuf/proto"

	"fovea/app/core"
	"fovea/assets"
	"fovea/modelio"
	"fovea/modelio/onnxpb"
	"fovea/viz"
)

// plantedDead is the filter of the demo's first convolution whose bias the
// test sets to −1000: whatever the picture, that channel's ReLU is 0.
const plantedDead = 5

// floatsOf reads a float32 initializer straight from the protobuf (raw_data
// little-endian or float_data, ONNX IR spec), without modelio.
func floatsOf(t *testing.T, tp *onnxpb.TensorProto) []float32 {
	t.Helper()
	if raw := tp.GetRawData(); len(raw) > 0 {
		out := make([]float32, len(raw)/4)
		for i := range out {
			out[i] = math.Float32frombits(binary.LittleEndian.Uint32(raw[4*i:]))
		}
		return out
	}
	return slices.Clone(tp.GetFloatData())
}

// TestWindowViewsShowKnownValues checks one value in each of the kernel, map
// and health views that is known without Fovea's code: a weight read from the
// model file, and a channel made dead by construction. The model is the
// demo with the bias of first-layer filter plantedDead set to −1000; the
// premise, checked here, is that no picture in 0..1 (even after the demo's
// normalisation) can lift Σ|w|·|x| anywhere near 1000, so that channel's
// ReLU output is exactly 0 on every image.
func TestWindowViewsShowKnownValues(t *testing.T) {
	var pb onnxpb.ModelProto
	if err := proto.Unmarshal(assets.Model(), &pb); err != nil {
		t.Fatal(err)
	}
	g := pb.GetGraph()
	inits := map[string]*onnxpb.TensorProto{}
	for _, tp := range g.GetInitializer() {
		inits[tp.GetName()] = tp
	}
	var conv *onnxpb.NodeProto
	for _, n := range g.GetNode() {
		if n.GetOpType() == "Conv" && n.GetInput()[0] == g.GetInput()[0].GetName() {
			conv = n
			break
		}
	}
	if conv == nil || len(conv.GetInput()) < 3 {
		t.Fatal("the demo's first Conv (with bias) reading the image was not found")
	}
	wt, bt := inits[conv.GetInput()[1]], inits[conv.GetInput()[2]]
	w, bias := floatsOf(t, wt), floatsOf(t, bt)
	dims := wt.GetDims() // [M, C, kH, kW]
	c, kh, kw := int(dims[1]), int(dims[2]), int(dims[3])
	per := c * kh * kw
	sumAbs := 0.0
	for _, v := range w[plantedDead*per : (plantedDead+1)*per] {
		sumAbs += math.Abs(float64(v))
	}
	// The demo's inputs are at most a few units in size (range 0-1, or
	// mean/std with std ≥ 0.1): |x| ≤ 10 bounds them generously.
	if sumAbs*10 >= 1000 {
		t.Fatalf("test premise: filter %d's Σ|w| = %g could reach 1000", plantedDead, sumAbs)
	}
	bias[plantedDead] = -1000
	bt.RawData, bt.FloatData = nil, bias
	data, err := proto.Marshal(&pb)
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "planted dead.onnx")
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}

	u := openWindow(t, Options{Model: path, View: viewKernels})
	if u.ws == nil || u.acts == nil {
		t.Fatalf("the planted model did not open with an image (error: %s)", dialogText(u))
	}

	// Kernel view: filter 0's weight at kernel position (0, 0) in each input
	// channel is drawn, per the documented tile colours (viz.Tiles: byte =
	// round(v/s·127 + 128), s the largest |weight| of the layer with the
	// shared scale), at the centre of the tile's top-left cell.
	kv := u.vKernels
	if kv.perFilter.Checked || c != 3 {
		t.Fatalf("premise: shared scale (per filter %v) and 3 input channels (%d)", kv.perFilter.Checked, c)
	}
	s := 0.0
	for _, v := range w {
		s = math.Max(s, math.Abs(float64(v)))
	}
	var tile *viz.TileInfo
	for i := range kv.info {
		if kv.info[i].Index == 0 {
			tile = &kv.info[i]
		}
	}
	pic, ok := kv.pic.img.Image.(*image.NRGBA)
	if tile == nil || !ok {
		t.Fatalf("kernels view: no tile for filter 0 or no picture (%T)", kv.pic.img.Image)
	}
	cell := tile.Rect.Dx() / kw
	got := pic.NRGBAAt(tile.Rect.Min.X+cell/2, tile.Rect.Min.Y+cell/2)
	byteOf := func(v float32) uint8 { return uint8(math.Round(float64(v)/s*127 + 128)) }
	want := color.NRGBA{byteOf(w[0*kh*kw]), byteOf(w[1*kh*kw]), byteOf(w[2*kh*kw]), 255}
	if got != want {
		t.Errorf("kernels view: filter 0, weight (0,0) drawn %v, want %v for weights %v, %v, %v (scale %g)",
			got, want, w[0], w[kh*kw], w[2*kh*kw], s)
	}

	// Map view: the first ReLU after that Conv; the planted channel's tile
	// is the colour of 0 everywhere (the bottom of the shared range, which
	// starts at 0 for a ReLU) and its statistics say it never fired.
	var relu string
	for _, n := range g.GetNode() {
		if n.GetOpType() == "Relu" && n.GetInput()[0] == conv.GetOutput()[0] {
			relu = n.GetOutput()[0]
		}
	}
	var layer modelio.Layer
	for _, l := range u.ws.Model.Layers {
		if l.Output == relu {
			layer = l
		}
	}
	u.showView(viewMaps)
	u.vMaps.layer.SetSelected(layer.Name)
	mv := u.vMaps
	grid, ok := mv.grid.img.Image.(*image.NRGBA)
	if !ok || len(mv.tiles) <= plantedDead {
		t.Fatalf("maps view of %s (%q): picture %T, %d tiles", layer.Name, relu, mv.grid.img.Image, len(mv.tiles))
	}
	st := mv.tiles[plantedDead]
	zero := viz.Sequential(0)
	if st.Channel != plantedDead || st.Max != 0 || st.Fires != 0 {
		t.Errorf("maps view: channel %d stats %+v, want max 0 and never fired", plantedDead, st)
	}
	for y := st.Rect.Min.Y; y < st.Rect.Max.Y; y++ {
		for x := st.Rect.Min.X; x < st.Rect.Max.X; x++ {
			if p := grid.NRGBAAt(x, y); p != zero {
				t.Fatalf("maps view: the dead channel's tile has %v at (%d,%d), want the colour of 0 %v", p, x, y, zero)
			}
		}
	}

	// Health view: a scan of the demo's probe images marks exactly the
	// planted filter dead in that layer, and its tile wears the frame of a
	// severe flag (magenta-red, viz.Tiles) in the ring around it while a
	// live filter's ring does not.
	// The probe images go into a folder, as a user would choose one.
	dir := t.TempDir()
	fsys, names, err := core.DemoProbes()
	if err != nil {
		t.Fatal(err)
	}
	for _, n := range names {
		b, err := fs.ReadFile(fsys, n)
		if err == nil {
			err = os.WriteFile(filepath.Join(dir, filepath.Base(n)), b, 0o644)
		}
		if err != nil {
			t.Fatal(err)
		}
	}
	u.showView(viewHealth)
	u.setProbeDir(dir)
	u.do(func() { test.Tap(u.vHealth.scanBtn) })
	u.wait()
	if u.scan == nil || u.errShown > 0 {
		t.Fatalf("no scan (error: %s)", dialogText(u))
	}
	hv := u.vHealth
	hv.conv = ""
	for _, l := range u.scan.Layers {
		if l.Output == relu {
			hv.conv = l.Conv
		}
	}
	hv.drawTiles()
	if got := deadTiles(hv.info); !slices.Contains(got, plantedDead) {
		t.Errorf("health view: dead tiles %v, want the planted %d among them", got, plantedDead)
	}
	hpic, ok := hv.tiles.img.Image.(*image.NRGBA)
	if !ok {
		t.Fatalf("health view picture %T", hv.tiles.img.Image)
	}
	ring := func(ti viz.TileInfo) color.NRGBA { return hpic.NRGBAAt(ti.Rect.Min.X-2, ti.Rect.Min.Y+ti.Rect.Dy()/2) }
	severe := func(p color.NRGBA) bool { return p.R > 180 && int(p.R) > int(p.G)+100 && p.R > p.B }
	for _, ti := range hv.info {
		switch {
		case ti.Index == plantedDead && !severe(ring(ti)):
			t.Errorf("health view: the planted dead filter's ring is %v, want the magenta-red frame", ring(ti))
		case len(ti.Flags) == 0 && severe(ring(ti)):
			t.Errorf("health view: unflagged filter %d has a magenta-red ring %v", ti.Index, ring(ti))
		}
	}
}
