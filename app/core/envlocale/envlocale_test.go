package envlocale

import (
	"os"
	"testing"
)

// The locale variables and their precedence are POSIX's (The Open Group Base
// Specifications, Environment Variables, 8.2: LC_ALL, then LC_*, then LANG).
func TestFix(t *testing.T) {
	for _, c := range []struct {
		lcAll, lcMessages, lang, language string
		want                              bool
	}{
		{"", "", "C.UTF-8", "", true},
		{"C.UTF-8", "", "de_DE.UTF-8", "", true}, // LC_ALL wins
		{"", "C.utf8", "", "", true},
		{"", "", "POSIX@euro", "", true},
		{"", "", "C", "", false},                  // plain C: Fyne reads it as English already
		{"", "", "de_DE.UTF-8", "", false},        // a real locale
		{"de_DE.UTF-8", "", "C.UTF-8", "", false}, // LC_ALL wins
		{"", "", "C.UTF-8", "fr", false},          // the user chose LANGUAGE
		{"", "", "", "", false},
	} {
		t.Setenv("LC_ALL", c.lcAll)
		t.Setenv("LC_MESSAGES", c.lcMessages)
		t.Setenv("LANG", c.lang)
		t.Setenv("LANGUAGE", c.language)
		got := Fix()
		if got != c.want {
			t.Errorf("%+v: Fix() = %v", c, got)
		}
		if got && os.Getenv("LANGUAGE") != "en" {
			t.Errorf("%+v: LANGUAGE = %q, want en", c, os.Getenv("LANGUAGE"))
		}
		if !got && os.Getenv("LANGUAGE") != c.language {
			t.Errorf("%+v: LANGUAGE changed to %q", c, os.Getenv("LANGUAGE"))
		}
	}
}
