package prep

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"time"

	"fovea/modelio/atomicfile"
)

// Settings are the choices a user made for one model, remembered across sessions. They
// are keyed by the SHA-256 of the model file's content, so renaming or moving the file
// keeps them and a changed model (same name, new weights) starts afresh.
type Settings struct {
	Hash   string    `json:"sha256"`           // hex SHA-256 of the model file, from HashFile
	Model  string    `json:"model,omitempty"`  // the model's path when saved, for people reading the file
	Prep   Config    `json:"preprocess"`       // preprocessing in force
	Labels string    `json:"labels,omitempty"` // labels file chosen by the user, absolute path
	Saved  time.Time `json:"saved,omitzero"`   // set by SaveSettings
}

// SettingsDir is where per-model settings live: os.UserConfigDir()/fovea/models
// (for example ~/.config/fovea/models on Linux). It is not created here.
func SettingsDir() (string, error) {
	base, err := os.UserConfigDir()
	if err != nil {
		return "", fmt.Errorf("prep: no folder for settings: %w", err)
	}
	return filepath.Join(base, "fovea", "models"), nil
}

// HashFile returns the hex SHA-256 of a file's content, reading it as a stream.
func HashFile(path string) (string, error) {
	f, err := os.Open(path)
	if err != nil {
		return "", fmt.Errorf("prep: %w", err)
	}
	defer f.Close()
	h := sha256.New()
	if _, err := io.Copy(h, f); err != nil {
		return "", fmt.Errorf("prep: %s: %w", path, err)
	}
	return hex.EncodeToString(h.Sum(nil)), nil
}

// validHash reports whether h is 64 lower-case hex digits, so that it can be a file name
// and cannot name anything outside the settings folder.
func validHash(h string) bool {
	if len(h) != 2*sha256.Size {
		return false
	}
	for _, c := range []byte(h) {
		if !('0' <= c && c <= '9' || 'a' <= c && c <= 'f') {
			return false
		}
	}
	return true
}

// settingsPath is dir/<hash>.json.
func settingsPath(dir, hash string) (string, error) {
	if !validHash(hash) {
		return "", fmt.Errorf("prep: settings key %q: want the 64 hex digits of a SHA-256 (HashFile)", hash)
	}
	return filepath.Join(dir, hash+".json"), nil
}

// maxSettingsBytes bounds what LoadSettings reads: a settings file is a few hundred bytes.
const maxSettingsBytes = 1 << 20

// LoadSettings reads dir/<hash>.json. found is false, with a nil error, when there is no
// such file. A file that cannot be parsed or holds unusable settings gives an error
// naming it; the caller can fall back to [Guess].
func LoadSettings(dir, hash string) (s Settings, found bool, err error) {
	path, err := settingsPath(dir, hash)
	if err != nil {
		return Settings{}, false, err
	}
	f, err := os.Open(path)
	if errors.Is(err, fs.ErrNotExist) {
		return Settings{}, false, nil
	}
	if err != nil {
		return Settings{}, false, fmt.Errorf("prep: %w", err)
	}
	defer f.Close()
	data, err := io.ReadAll(io.LimitReader(f, maxSettingsBytes+1))
	if err != nil {
		return Settings{}, false, fmt.Errorf("prep: %s: %w", path, err)
	}
	if len(data) > maxSettingsBytes {
		return Settings{}, false, fmt.Errorf("prep: %s: over %d bytes, not a settings file", path, maxSettingsBytes)
	}
	if err := json.Unmarshal(data, &s); err != nil {
		return Settings{}, false, fmt.Errorf("prep: %s: not readable as settings: %w", path, err)
	}
	if s.Hash != hash {
		return Settings{}, false, fmt.Errorf("prep: %s: records model %q, not %q", path, s.Hash, hash)
	}
	if err := s.Prep.Validate(); err != nil {
		return Settings{}, false, fmt.Errorf("prep: %s: %w", path, err)
	}
	return s, true, nil
}

// SaveSettings writes s to dir/<s.Hash>.json as indented JSON, creating dir when needed,
// and sets s.Saved. The write is atomic: a temporary file in dir is written, synced and
// renamed over the old one, so a crash leaves either the old file or the new one.
func SaveSettings(dir string, s *Settings) error {
	path, err := settingsPath(dir, s.Hash)
	if err != nil {
		return err
	}
	if err := s.Prep.Validate(); err != nil {
		return err
	}
	s.Saved = time.Now().UTC().Truncate(time.Second)
	data, err := json.MarshalIndent(s, "", "  ")
	if err != nil {
		return fmt.Errorf("prep: settings for %s: %w", s.Hash, err)
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return fmt.Errorf("prep: %w", err)
	}
	if err := atomicfile.WriteBytes(path, append(data, '\n'), 0o644); err != nil {
		return fmt.Errorf("prep: %w", err)
	}
	return nil
}
