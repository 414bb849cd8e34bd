package modelio_test

import (
	"strings"
	"testing"

	"fovea/modelio"
	"fovea/modelio/onnxbuild"
)

func openBuilt(t *testing.T, b *onnxbuild.Builder) *modelio.Model {
	t.Helper()
	data, err := b.Bytes()
	if err != nil {
		t.Fatal(err)
	}
	m, err := modelio.Decode(data, "built.onnx")
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// TestStagesResNet18: He et al. 2016, Table 1: the stem (7×7/2 convolution
// with its normalisation and ReLU), the 3×3/2 max pooling, then one cut after
// each of the eight basic blocks' final ReLU; global average pooling ends
// the tracked front. A block's tensors are never cuts: its shortcut is live.
func TestStagesResNet18(t *testing.T) {
	m := openBuilt(t, onnxbuild.ResNet18(onnxbuild.Zeros, "N", 10))
	st, why := m.Stages()
	if len(st) != 10 {
		t.Fatalf("%d stages, want 10 (stem, pool, 8 blocks); %s", len(st), why)
	}
	if !strings.Contains(why, "GlobalAveragePool") {
		t.Errorf("the front should end at the global pooling: %s", why)
	}
	wantSides := []int{112, 56, 56, 56, 28, 28, 14, 14, 7, 7}
	for i, s := range st {
		if s.Out().Height() != wantSides[i] || s.Out().Width() != wantSides[i] {
			t.Errorf("stage %d ends at %s of %v, want %d×%d", i, s.Out().Name, s.Out().Shape, wantSides[i], wantSides[i])
		}
		if i > 0 && s.In().Name != st[i-1].Out().Name {
			t.Errorf("stage %d starts at %s, not where stage %d ended", i, s.In().Name, i-1)
		}
	}
	// The stem: a 7×7 window with stride 2 and padding 3, then pointwise steps.
	var win []modelio.StageStep
	for _, s := range st[0].Steps {
		if s.Window {
			win = append(win, s)
		}
	}
	if len(win) != 1 || win[0].K != [2]int{7, 7} || win[0].S != [2]int{2, 2} || win[0].PadBegin != [2]int{3, 3} {
		t.Errorf("stem windows %+v", win)
	}
}

// TestSubModel: a cut from one stage boundary to the next runs alone; a cut
// whose outputs still need the image input is refused with the reason.
func TestSubModel(t *testing.T) {
	m := openBuilt(t, onnxbuild.ResNet18(onnxbuild.Zeros, "N", 10))
	st, _ := m.Stages()
	in := st[2].In()
	sub, err := m.SubModel([]modelio.SubInput{{Name: in.Name, Symbolic: []int{in.HAxis, in.WAxis}}}, []string{st[2].Out().Name})
	if err != nil {
		t.Fatal(err)
	}
	if len(sub.Inputs) != 1 || sub.Inputs[0].Name != in.Name || sub.Inputs[0].Shape[2].Known() || !sub.Inputs[0].Shape[1].Known() {
		t.Errorf("sub-model inputs %+v: want %s with open height and width", sub.Inputs, in.Name)
	}
	if len(sub.Outputs) != 1 || sub.Outputs[0].Name != st[2].Out().Name {
		t.Errorf("sub-model outputs %+v", sub.Outputs)
	}
	if _, err := m.SubModel([]modelio.SubInput{{Name: in.Name}}, []string{st[0].Out().Name}); err == nil ||
		!strings.Contains(err.Error(), "depend on the model input") {
		t.Errorf("a cut that does not separate: %v", err)
	}
}
