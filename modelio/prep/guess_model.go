package prep

import "fovea/modelio"

// Guess proposes a Config for model m: [GuessFrom] on m's image input and metadata.
// Use [GuessModel] to also get the notes on what was assumed.
func Guess(m *modelio.Model) Config {
	c, _ := GuessModel(m)
	return c
}

// GuessModel is [Guess] with the notes of [GuessFrom], for showing beside the settings.
func GuessModel(m *modelio.Model) (Config, []string) {
	var in *Input
	if im := m.Image; im != nil {
		in = &Input{Layout: im.Layout, Channels: im.Channels, Height: im.Height, Width: im.Width}
	}
	return GuessFrom(in, m.Metadata)
}
