// Package envlocale names English for the messages of a process whose locale
// is the C or POSIX locale in a form that toolkits do not parse, such as
// LANG=C.UTF-8 (the usual setting of containers and CI runners).
//
// Fyne reads the locale while its packages initialise and logs three lines
// of "Error parsing user locale C" for C.UTF-8: noise on the stderr of every
// command-line run, whose contract is one line on failure. Importing this
// package (blank import in package main) sets LANGUAGE=en in that case,
// before Fyne's initialisation: Go initialises packages in import-path order
// once their imports are ready (The Go Programming Language Specification,
// "Package initialization"), and this package imports only the standard
// library and sorts before fyne.io.
package envlocale

import (
	"os"
	"strings"
)

func init() { Fix() }

// Fix sets LANGUAGE=en when LANGUAGE is unset and the locale that decides
// messages (LC_ALL, else LC_MESSAGES, else LANG: the POSIX order) is C or
// POSIX with a codeset or modifier ("C.UTF-8", "POSIX@x"). It reports
// whether it changed anything. Real locales ("de_DE.UTF-8") and the plain
// "C" are left alone: toolkits handle those.
func Fix() bool {
	if os.Getenv("LANGUAGE") != "" {
		return false
	}
	loc := ""
	for _, k := range []string{"LC_ALL", "LC_MESSAGES", "LANG"} {
		if loc = os.Getenv(k); loc != "" {
			break
		}
	}
	base, _, _ := strings.Cut(loc, "@")
	lang, _, hasCodeset := strings.Cut(base, ".")
	if (lang == "C" || lang == "POSIX") && (hasCodeset || base != loc) {
		os.Setenv("LANGUAGE", "en")
		return true
	}
	return false
}
