package prep

import (
	"encoding/json"
	"fmt"

	"fovea/modelio"
)

// configJSON is the file form of a Config: readable names, the channel order as a word
// and the background as #rrggbb.
type configJSON struct {
	Width      int            `json:"width"`
	Height     int            `json:"height"`
	Channels   int            `json:"channels"`
	Order      string         `json:"order"`
	Resize     string         `json:"resize"`
	Range      string         `json:"range"`
	Mean       []float32      `json:"mean"`
	Std        []float32      `json:"std"`
	Layout     modelio.Layout `json:"layout"`
	Background string         `json:"background"`
}

// MarshalJSON writes c as
//
//	{"width":224,"height":224,"channels":3,"order":"rgb","resize":"crop","range":"0-1",
//	 "mean":[0.485,0.456,0.406],"std":[0.229,0.224,0.225],"layout":"nchw","background":"#ffffff"}
func (c Config) MarshalJSON() ([]byte, error) {
	j := configJSON{
		Width: c.Width, Height: c.Height, Channels: c.Channels, Order: "rgb",
		Resize: c.Resize, Range: c.Range, Mean: c.Mean[:], Std: c.Std[:], Layout: c.Layout,
		Background: fmt.Sprintf("#%02x%02x%02x", c.Background.R, c.Background.G, c.Background.B),
	}
	if c.BGR {
		j.Order = "bgr"
	}
	return json.Marshal(j)
}

// UnmarshalJSON reads the form MarshalJSON writes. Fields that are absent keep the
// values of [Default]; the result is not validated (see [Config.Validate]).
func (c *Config) UnmarshalJSON(data []byte) error {
	d := Default()
	j := configJSON{Width: d.Width, Height: d.Height, Channels: d.Channels, Order: "rgb",
		Resize: d.Resize, Range: d.Range, Layout: d.Layout, Background: "#ffffff"}
	if err := json.Unmarshal(data, &j); err != nil {
		return err
	}
	d.Width, d.Height, d.Channels, d.Resize, d.Range, d.Layout = j.Width, j.Height, j.Channels, j.Resize, j.Range, j.Layout
	var err error
	if d.BGR, err = ParseOrder(j.Order); err != nil {
		return err
	}
	if d.Background, err = ParseColor(j.Background); err != nil {
		return err
	}
	for _, f := range []struct {
		name string
		src  []float32
		dst  *[3]float32
	}{{"mean", j.Mean, &d.Mean}, {"std", j.Std, &d.Std}} {
		switch len(f.src) {
		case 0: // absent: keep the default
		case 1:
			*f.dst = [3]float32{f.src[0], f.src[0], f.src[0]}
		case 3:
			*f.dst = [3]float32(f.src)
		default:
			return fmt.Errorf("prep: %s has %d numbers, want 1 or 3", f.name, len(f.src))
		}
	}
	*c = d
	return nil
}
