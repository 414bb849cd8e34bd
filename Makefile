# Fovea's two everyday commands (see README.md): `make run` and `make test`.
# Both install what is missing first and are safe to run again: a second run
# installs and downloads nothing. `make bench` prints the benchmark ratios.

SHELL := /bin/bash
.SHELLFLAGS := -eu -o pipefail -c
export LANG := C.UTF-8
export LC_ALL := C.UTF-8
# Fyne reads LANG=C.UTF-8 as an unknown locale and logs an error; LANGUAGE wins.
export LANGUAGE := en
export CGO_ENABLED := 1

# Debian packages: a C compiler and the OpenGL/X11 headers Fyne's cgo needs,
# npm to fetch the ONNX Runtime library, and for the tests the ONNX
# conformance data. An entry `command:package` is satisfied by the command
# being on the PATH however it got there (Node.js from elsewhere ships its own
# npm and conflicts with Debian's); a plain `package` must be installed.
RUN_DEBS  := gcc:gcc libc6-dev pkg-config:pkg-config libgl1-mesa-dev xorg-dev npm:npm ca-certificates
TEST_DEBS := $(RUN_DEBS) libonnx-testdata
# Go release named in go.mod; an older or missing go gets it from the Go module proxy.
GO_WANT   := $(shell sed -n 's/^go \([0-9.]*\)$$/\1/p' go.mod)
GOCACHE_TOOLS := $(HOME)/.cache/fovea/go-$(GO_WANT)
GO        := $(shell bash -c 'v=$$(go env GOVERSION 2>/dev/null | sed "s/^go//"); if [ -n "$$v" ] && [ "$$(printf "%s\n1.21\n" "$$v" | sort -V | head -1)" = 1.21 ]; then command -v go; else echo $(GOCACHE_TOOLS)/go/bin/go; fi')
BIN       := bin/fovea
FUZZTIME  ?= 20s

.PHONY: run test bench ort deps-run deps-test go-toolchain build check-format vet unit fuzz

run: deps-run build ort
	$(BIN)

test: deps-test build ort check-format vet unit fuzz
	@echo "make test: all checks passed"

# bench writes the synthetic models (about 600 MB, removed afterwards) into a
# temporary folder, runs the ratio benchmarks one package at a time (-p 1:
# they must not share the cores with each other), keeps the raw output in
# /tmp/fovea-bench.txt and prints the table of ratios with their goals. The
# demo's capture ratio is infer's BenchmarkCaptureRatio, which repeats its
# short runs for -benchtime 2s; the others interleave the measured operation
# with its bound for 10 iterations and report the median ratio. About 4
# minutes on 2 cores when nobody else is using them.
bench: deps-test build ort
	@dir=$$(mktemp -d "$${TMPDIR:-/tmp}/fovea-bench.XXXXXX"); trap 'rm -rf "$$dir"' EXIT; \
	$(GO) run ./modelio/internal/synth/synthbench models "$$dir"; \
	status=0; \
	{ r=0; $(GO) test -p 1 -count 1 -run '^$$' -bench '^BenchmarkCaptureRatio$$' -benchtime 2s ./modelio/infer || r=1; \
	  FOVEA_BENCH_MODELS="$$dir" $(GO) test -p 1 -count 1 -timeout 30m -run '^$$' -benchtime 10x \
	    -bench '^Benchmark(OcclusionRatio|ScanRatio|CaptureRatioResNet18|OpenRatio)$$' ./viz/analysis ./modelio/infer ./modelio || r=1; \
	  exit $$r; } 2>&1 | tee /tmp/fovea-bench.txt || status=$$?; \
	echo; $(GO) run ./modelio/internal/synth/synthbench table /tmp/fovea-bench.txt || status=1; \
	exit $$status

deps-run: go-toolchain
	@$(call install_debs,$(RUN_DEBS))

deps-test: go-toolchain
	@$(call install_debs,$(TEST_DEBS))

# install_debs installs the Debian packages of $(1) that are missing, with
# sudo when not root, and says so; it says one line when nothing is missing.
define install_debs
missing=(); for e in $(1); do p=$${e#*:}; \
  if [ "$$e" != "$$p" ]; then command -v "$${e%%:*}" >/dev/null 2>&1 && continue; \
  else dpkg-query -W -f='$${Status}' "$$p" 2>/dev/null | grep -q 'ok installed' && continue; fi; missing+=("$$p"); done; \
if [ $${#missing[@]} -eq 0 ]; then echo "system packages: all present ($(words $(1)))"; exit 0; fi; \
if ! command -v apt-get >/dev/null; then echo "error: missing $${missing[*]} and no apt-get here: install them by hand" >&2; exit 1; fi; \
sudo=""; if [ "$$(id -u)" != 0 ]; then if command -v sudo >/dev/null; then sudo=sudo; else echo "error: need root or sudo to install: $${missing[*]}" >&2; exit 1; fi; fi; \
echo "installing Debian packages: $${missing[*]}"; \
$$sudo env DEBIAN_FRONTEND=noninteractive apt-get update -q >/dev/null || { echo "error: apt-get update failed" >&2; exit 1; }; \
$$sudo env DEBIAN_FRONTEND=noninteractive apt-get install -y -q --no-install-recommends "$${missing[@]}" >/tmp/fovea-apt.log 2>&1 || { tail -20 /tmp/fovea-apt.log >&2; echo "error: could not install $${missing[*]} (log: /tmp/fovea-apt.log)" >&2; exit 1; }
endef

go-toolchain:
	@if [ -x "$(GO)" ] || command -v "$(GO)" >/dev/null 2>&1; then echo "go: $$($(GO) env GOVERSION) (go.mod asks for $(GO_WANT); newer toolchains come from the Go module proxy automatically)"; \
	else echo "installing Go $(GO_WANT) from the Go module proxy into $(GOCACHE_TOOLS)"; \
	  command -v curl >/dev/null && command -v unzip >/dev/null || { echo "error: need curl and unzip to fetch Go" >&2; exit 1; }; \
	  mkdir -p "$(GOCACHE_TOOLS)" && tmp=$$(mktemp -d) && \
	  curl -fsSL -o "$$tmp/go.zip" "https://proxy.golang.org/golang.org/toolchain/@v/v0.0.1-go$(GO_WANT).linux-amd64.zip" && \
	  unzip -q "$$tmp/go.zip" -d "$$tmp" && rm -rf "$(GOCACHE_TOOLS)/go" && \
	  mv "$$tmp/golang.org/toolchain@v0.0.1-go$(GO_WANT).linux-amd64" "$(GOCACHE_TOOLS)/go" && rm -rf "$$tmp"; fi

build:
	@echo "building $(BIN) (the first build compiles Fyne: about 3 minutes)"
	@$(GO) build -o $(BIN) ./app

# ort puts the ONNX Runtime library in the user cache (downloads only once).
ort: build
	@$(BIN) fetch-runtime

check-format:
	@out=$$(gofmt -l $$(git ls-files '*.go' 2>/dev/null || find . -name '*.go')); if [ -n "$$out" ]; then echo "gofmt would change:"; echo "$$out"; exit 1; fi; echo "gofmt: clean"

vet:
	$(GO) vet ./...

# Packages that do not import Fyne run under the race detector; the app
# package (Fyne, cgo OpenGL) runs without it, through Fyne's headless driver.
unit:
	@nofyne=$$($(GO) list -f '{{.ImportPath}} {{join .Deps " "}}' ./... | grep -v 'fyne.io/' | cut -d' ' -f1); \
	withfyne=$$($(GO) list -f '{{.ImportPath}} {{join .Deps " "}}' ./... | grep 'fyne.io/' | cut -d' ' -f1); \
	echo "race-tested: $$nofyne" | tr '\n' ' '; echo; \
	$(GO) test -race -count 1 -timeout 30m $$nofyne; \
	if [ -n "$$withfyne" ]; then $(GO) test -count 1 -timeout 30m $$withfyne; fi

# Each fuzz target runs for $(FUZZTIME); a crasher fails the build and is
# saved under the package's testdata/fuzz for a regression test. Minimising
# inputs is off (-fuzzminimizetime 0): with it, a short run spends most of its
# time shrinking seed models, and a minimisation cut off by -fuzztime makes Go
# report "context deadline exceeded" as a failure. A crasher is kept as found.
fuzz:
	@for t in $$($(GO) list -f '{{.Dir}}' ./... ); do \
	  for f in $$(grep -ho '^func Fuzz[A-Za-z0-9_]*' $$t/*_test.go 2>/dev/null | sed 's/^func //'); do \
	    echo "fuzz $$f in $$t for $(FUZZTIME)"; \
	    (cd $$t && $(GO) test -run '^$$' -fuzz "^$$f\$$" -fuzztime $(FUZZTIME) -fuzzminimizetime 0 . ) ; \
	  done; done
