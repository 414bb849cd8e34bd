package prep

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"
)

// HashFile is SHA-256 of the content: the FIPS 180-2 test vector for "abc", the same
// hash for the same bytes under another name, and a multi-megabyte file equal to the
// one-shot sum of the standard library.
func TestHashFile(t *testing.T) {
	dir := t.TempDir()
	write := func(name string, data []byte) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, data, 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	h, err := HashFile(write("a.onnx", []byte("abc")))
	if err != nil {
		t.Fatal(err)
	}
	// FIPS 180-2, appendix B.1: SHA-256("abc").
	if want := "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"; h != want {
		t.Errorf("sha256(abc) = %s, want %s", h, want)
	}
	if h2, _ := HashFile(write("renamed copy.onnx", []byte("abc"))); h2 != h {
		t.Error("same content, different name: different hash")
	}
	if h3, _ := HashFile(write("b.onnx", []byte("abd"))); h3 == h {
		t.Error("different content, same hash")
	}
	big := bytes.Repeat([]byte("0123456789abcdef"), 3<<16) // 3 MiB
	sum := sha256.Sum256(big)
	if h4, _ := HashFile(write("big.onnx", big)); h4 != hex.EncodeToString(sum[:]) {
		t.Error("streamed hash differs from sha256.Sum256")
	}
	if _, err := HashFile(filepath.Join(dir, "missing.onnx")); err == nil || !strings.Contains(err.Error(), "missing.onnx") {
		t.Errorf("missing file: %v", err)
	}
}

const testHash = "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"

func TestSettingsRoundTrip(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "fovea", "models") // created by SaveSettings
	if _, found, err := LoadSettings(dir, testHash); found || err != nil {
		t.Fatalf("before saving: found %v, err %v", found, err)
	}
	s := Settings{Hash: testHash, Model: "/models/parts.onnx", Labels: "/models/parts.txt",
		Prep: mustSet(t, Default(), "preset", "imagenet", "size", "64x64", "resize", "crop:72", "background", "#000")}
	if err := SaveSettings(dir, &s); err != nil {
		t.Fatal(err)
	}
	if s.Saved.IsZero() {
		t.Error("Saved not set")
	}
	got, found, err := LoadSettings(dir, testHash)
	if err != nil || !found {
		t.Fatalf("found %v, err %v", found, err)
	}
	if got.Prep != s.Prep || got.Labels != s.Labels || got.Model != s.Model || !got.Saved.Equal(s.Saved) {
		t.Errorf("round trip:\n%+v\n%+v", got, s)
	}
	// Readable indented JSON with the documented names.
	data, err := os.ReadFile(filepath.Join(dir, testHash+".json"))
	if err != nil {
		t.Fatal(err)
	}
	for _, w := range []string{"{\n  \"sha256\": \"" + testHash + "\"", "\n  \"preprocess\": {", "\"range\": \"0-1\"", "\"resize\": \"crop:72\"", "\"labels\": \"/models/parts.txt\"", "\"background\": \"#000000\""} {
		if !bytes.Contains(data, []byte(w)) {
			t.Errorf("settings file lacks %q:\n%s", w, data)
		}
	}
	// Saving again replaces the file and leaves nothing else in the folder.
	s.Prep.Width = 32
	if err := SaveSettings(dir, &s); err != nil {
		t.Fatal(err)
	}
	if got, _, _ := LoadSettings(dir, testHash); got.Prep.Width != 32 {
		t.Errorf("second save not read back: %v", got.Prep)
	}
	assertOnly(t, dir, testHash+".json")
}

// assertOnly checks that dir holds exactly the named files (no temporary leftovers).
func assertOnly(t *testing.T, dir string, names ...string) {
	t.Helper()
	entries, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	var got []string
	for _, e := range entries {
		got = append(got, e.Name())
	}
	if strings.Join(got, ",") != strings.Join(names, ",") {
		t.Errorf("folder holds %q, want %q", got, names)
	}
}

// A save that fails leaves the folder as it was: no temporary file. Here the
// rename fails (a folder stands where the settings file goes); a write that
// fails half-way is atomicfile's TestFailedWriteKeepsOldFile.
func TestSettingsAtomicOnFailure(t *testing.T) {
	dir := t.TempDir()
	s := Settings{Hash: testHash, Prep: Default()}
	if err := SaveSettings(dir, &s); err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(dir, testHash+".json")
	old, _ := os.ReadFile(path)

	other := strings.Repeat("0", 64)
	blocked := filepath.Join(dir, other+".json")
	if err := os.MkdirAll(filepath.Join(blocked, "inside"), 0o755); err != nil {
		t.Fatal(err)
	}
	s.Hash = other
	err := SaveSettings(dir, &s)
	if err == nil || !strings.Contains(err.Error(), blocked) {
		t.Errorf("error %v: want the failed write naming %s", err, blocked)
	}
	if now, _ := os.ReadFile(path); !bytes.Equal(now, old) {
		t.Errorf("other settings changed after a failed write:\n%s", now)
	}
	assertOnly(t, dir, other+".json", testHash+".json")
}

// Keys that are not SHA-256 hex are refused before any file is touched (no path escapes).
func TestSettingsBadKeys(t *testing.T) {
	dir := t.TempDir()
	for _, h := range []string{"", "../" + testHash[3:], strings.ToUpper(testHash), testHash + "0", "g" + testHash[1:]} {
		s := Settings{Hash: h, Prep: Default()}
		if err := SaveSettings(dir, &s); err == nil || !strings.Contains(err.Error(), "64 hex digits") {
			t.Errorf("Save with key %q: %v", h, err)
		}
		if _, _, err := LoadSettings(dir, h); err == nil {
			t.Errorf("Load with key %q accepted", h)
		}
	}
	assertOnly(t, dir)
	// Invalid preprocessing is not saved.
	s := Settings{Hash: testHash, Prep: Config{}}
	if err := SaveSettings(dir, &s); err == nil || !strings.Contains(err.Error(), "bad settings") {
		t.Errorf("invalid config saved: %v", err)
	}
	assertOnly(t, dir)
}

// Damaged settings files give errors naming the file.
func TestSettingsDamaged(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, testHash+".json")
	for _, content := range []string{
		"{not json",
		`{"sha256":"` + strings.Repeat("1", 64) + `","preprocess":{}}`, // another model's record
		`{"sha256":"` + testHash + `","preprocess":{"range":"0-9"}}`,   // unusable settings
		`{"sha256":"` + testHash + `","preprocess":{"mean":[1,2]}}`,
		strings.Repeat(" ", maxSettingsBytes+1),
	} {
		if err := os.WriteFile(path, []byte(content), 0o644); err != nil {
			t.Fatal(err)
		}
		_, found, err := LoadSettings(dir, testHash)
		if err == nil || found || !strings.Contains(err.Error(), path) {
			t.Errorf("content %.40q: found %v, err %v", content, found, err)
		}
	}
}

// SettingsDir is under the user's config folder, never beside a model. On Unix systems
// os.UserConfigDir is $XDG_CONFIG_HOME when that is set (its documentation).
func TestSettingsDir(t *testing.T) {
	if runtime.GOOS == "windows" || runtime.GOOS == "darwin" || runtime.GOOS == "plan9" {
		t.Fatalf("this check is written for Unix; %s needs its own expectation", runtime.GOOS)
	}
	t.Setenv("XDG_CONFIG_HOME", "/tmp/xdg-test")
	dir, err := SettingsDir()
	if err != nil || dir != "/tmp/xdg-test/fovea/models" {
		t.Errorf("SettingsDir = %q, %v", dir, err)
	}
}
