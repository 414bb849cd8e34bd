# Fovea's two everyday commands (see README.md): `make run` and `make test`.
# Both install what is missing first and are safe to run again: a second run
# installs and downloads nothing. `make bench` prints the benchmark ratios.
# `make install` / `make uninstall` put Fovea into PREFIX (default ~/.local)
# or take it out again; `make package` builds the tarball to hand on;
# `make check-export` runs the README's PyTorch export recipe;
# `make refdata` regenerates the reference files the tests read that
# torchvision and the onnx package made.

SHELL := /bin/bash
.SHELLFLAGS := -eu -o pipefail -c
export LANG := C.UTF-8
export LC_ALL := C.UTF-8
# Fyne reads LANG=C.UTF-8 as an unknown locale and logs an error; LANGUAGE wins.
export LANGUAGE := en
export CGO_ENABLED := 1

# Debian packages: a C compiler and the OpenGL/X11 headers Fyne's cgo needs,
# zlib's headers (modelio/prep inflates PNG rows through the C zlib library),
# npm to fetch the ONNX Runtime library, and for the tests the ONNX
# conformance data. An entry `command:package` is satisfied by the command
# being on the PATH however it got there (Node.js from elsewhere ships its own
# npm and conflicts with Debian's); a plain `package` must be installed.
RUN_DEBS  := gcc:gcc libc6-dev pkg-config:pkg-config libgl1-mesa-dev xorg-dev zlib1g-dev npm:npm ca-certificates
TEST_DEBS := $(RUN_DEBS) libonnx-testdata desktop-file-validate:desktop-file-utils xz:xz-utils
# check-export: Debian's PyTorch and onnx for /usr/bin/python3 (about 1 GB).
EXPORT_DEBS := python3-torch python3-onnx python3-numpy python3-pil
# refdata: the same plus torchvision (its PIL transforms are the reference).
REFDATA_DEBS := $(EXPORT_DEBS) python3-torchvision python3-scipy
# Go release named in go.mod; an older or missing go gets it from the Go module proxy.
GO_WANT   := $(shell sed -n 's/^go \([0-9.]*\)$$/\1/p' go.mod)
GOCACHE_TOOLS := $(HOME)/.cache/fovea/go-$(GO_WANT)
GO        := $(shell bash -c 'v=$$(go env GOVERSION 2>/dev/null | sed "s/^go//"); if [ -n "$$v" ] && [ "$$(printf "%s\n1.21\n" "$$v" | sort -V | head -1)" = 1.21 ]; then command -v go; else echo $(GOCACHE_TOOLS)/go/bin/go; fi')
BIN       := bin/fovea
FUZZTIME  ?= 20s
# Where `make install` puts Fovea: PREFIX/bin/fovea, PREFIX/lib/fovea/ (ONNX
# Runtime and its licence), PREFIX/share/{applications,icons,mime}.
PREFIX    ?= $(HOME)/.local
# Fyne's packaging tool, pinned, installed once into the user cache.
FYNE_TOOL_VERSION := v1.7.4
FYNE_TOOL := $(HOME)/.cache/fovea/fyne-tool-$(FYNE_TOOL_VERSION)/fyne
APP_VERSION := $(shell sed -n 's/^ *Version *= *"\(.*\)"/\1/p' FyneApp.toml)
PACKAGE   := dist/fovea-$(APP_VERSION)-linux-amd64.tar.xz

.PHONY: run test bench ort deps-run deps-test go-toolchain build check-format vet unit fuzz \
	install uninstall package fyne-tool check-install check-package check-export deps-export refdata

run: deps-run build ort
	$(BIN)

test: deps-test build ort check-format vet unit fuzz check-install check-package
	@echo "make test: all checks passed"

# bench writes the synthetic models (about 600 MB, removed afterwards) into a
# temporary folder, runs the ratio benchmarks one package at a time (-p 1:
# they must not share the cores with each other), keeps the raw output in
# /tmp/fovea-bench.txt and prints the table of ratios with their goals. The
# demo's capture ratio is infer's BenchmarkCaptureRatio, which repeats its
# short runs for -benchtime 2s; the others interleave the measured operation
# with its bound for 10 iterations and report the median ratio. The scan is
# also measured at 1, 2 and all cores (BenchmarkScanCores, which limits the
# process itself). About 10 minutes on 2 cores when nobody else is using them.
bench: deps-test build ort
	@dir=$$(mktemp -d "$${TMPDIR:-/tmp}/fovea-bench.XXXXXX"); trap 'rm -rf "$$dir"' EXIT; \
	$(GO) run ./modelio/internal/synth/synthbench models "$$dir"; \
	status=0; \
	{ r=0; $(GO) test -p 1 -count 1 -run '^$$' -bench '^BenchmarkCaptureRatio$$' -benchtime 2s ./modelio/infer || r=1; \
	  FOVEA_BENCH_MODELS="$$dir" $(GO) test -p 1 -count 1 -timeout 30m -run '^$$' -benchtime 10x \
	    -bench '^Benchmark(OcclusionRatio|IncrementalRatio|ScanRatio|TopRatio|ScanCores|EvaluateRatio|CaptureRatioResNet18|OpenRatio)$$' ./viz/analysis ./modelio/infer ./modelio || r=1; \
	  exit $$r; } 2>&1 | tee /tmp/fovea-bench.txt || status=$$?; \
	echo; $(GO) run ./modelio/internal/synth/synthbench table /tmp/fovea-bench.txt || status=1; \
	exit $$status

deps-run: go-toolchain
	@$(call install_debs,$(RUN_DEBS))

deps-test: go-toolchain
	@$(call install_debs,$(TEST_DEBS))

deps-export:
	@$(call install_debs,$(EXPORT_DEBS))

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

# stage_tree lays out in $(1) the files packaging/install.sh installs, as
# they sit under a prefix: the binary, ONNX Runtime with its licence (fetched
# into the user cache first if missing), the desktop entry, the icon and the
# MIME type of .onnx files.
define stage_tree
install -D -m 0755 $(BIN) $(1)/bin/fovea; \
$(BIN) fetch-runtime --into $(1)/lib/fovea >/dev/null; \
install -D -m 0644 packaging/org.fovea.app.desktop $(1)/share/applications/org.fovea.app.desktop; \
install -D -m 0644 assets/icon.png $(1)/share/icons/hicolor/256x256/apps/org.fovea.app.png; \
install -D -m 0644 packaging/org.fovea.app.xml $(1)/share/mime/packages/org.fovea.app.xml
endef

# install needs no root with the default PREFIX (~/.local). The menu entry
# starts PREFIX/bin/fovea by its full path; the binary finds ONNX Runtime in
# PREFIX/lib/fovea without FOVEA_ORT_LIB or the cache.
install: deps-run build
	@stage=$$(mktemp -d "$${TMPDIR:-/tmp}/fovea-stage.XXXXXX"); trap 'rm -rf "$$stage"' EXIT; \
	$(call stage_tree,$$stage); \
	packaging/install.sh install "$$stage" "$(PREFIX)"

# uninstall removes exactly the files install wrote, and the folders it made
# when they are left empty.
uninstall:
	@packaging/install.sh uninstall - "$(PREFIX)"

fyne-tool: go-toolchain
	@if [ ! -x "$(FYNE_TOOL)" ]; then echo "installing Fyne's packaging tool $(FYNE_TOOL_VERSION) from the Go module proxy into $(dir $(FYNE_TOOL))"; \
	  GOFLAGS= GOBIN="$(dir $(FYNE_TOOL))" $(GO) install fyne.io/tools/cmd/fyne@$(FYNE_TOOL_VERSION); fi

# package: Fyne's packaging tool makes the Linux tarball from FyneApp.toml
# (name, ID, version, icon, desktop entry) and the built binary, in a copy
# of FyneApp.toml because the tool rewrites it (it counts up Build), beside
# a copy of app/main.go (the tool refuses a folder without Go code, though
# with --exe it builds nothing). The
# tool's tarball has neither ONNX Runtime nor a way to open a file from the
# desktop entry, and its Makefile installs only the binary, desktop entry and
# icon; so the tool's desktop entry is checked against ours (the keys both
# have must agree), and the tree is completed with ONNX Runtime and its
# licence in usr/local/lib/fovea, our desktop entry, the hicolor icon, the
# MIME type, install.sh with a Makefile that calls it, and README.txt.
package: deps-run build fyne-tool
	@work=$$(mktemp -d "$${TMPDIR:-/tmp}/fovea-package.XXXXXX"); trap 'rm -rf "$$work"' EXIT; \
	mkdir -p "$$work/fyne/assets" "$$work/out"; cp FyneApp.toml app/main.go "$$work/fyne/"; cp assets/icon.png "$$work/fyne/assets/"; \
	echo "packaging with Fyne's tool $(FYNE_TOOL_VERSION) (about a minute)"; \
	(cd "$$work/fyne" && "$(FYNE_TOOL)" package --os linux --release --exe "$(abspath $(BIN))"); \
	tar -xJf "$$work"/fyne/*.tar.xz -C "$$work/out"; \
	root="$$work/out/fovea"; usr="$$root/usr/local"; \
	[ -x "$$usr/bin/fovea" ] || { echo "error: Fyne's tarball has no usr/local/bin/fovea" >&2; exit 1; }; \
	fynedesk=$$(ls "$$usr"/share/applications/*.desktop); \
	for key in Name GenericName Comment Icon Categories Keywords StartupWMClass; do \
	  theirs=$$(sed -n "s/^$$key=//p" "$$fynedesk"); ours=$$(sed -n "s/^$$key=//p" packaging/org.fovea.app.desktop); \
	  [ "$$theirs" = "$$ours" ] || { echo "error: $$key differs: FyneApp.toml gives '$$theirs', packaging/org.fovea.app.desktop has '$$ours'" >&2; exit 1; }; \
	done; \
	rm -f "$$root/Makefile" "$$fynedesk"; rm -rf "$$usr/share/pixmaps"; \
	$(call stage_tree,$$usr); \
	install -m 0755 packaging/install.sh "$$root/install.sh"; \
	install -m 0644 packaging/tarball.mk "$$root/Makefile"; \
	sed "s/@VERSION@/$(APP_VERSION)/g; s/@ORT@/$$($(BIN) version | sed 's/.*ONNX Runtime \([0-9.]*\).*/\1/')/g" packaging/README.txt > "$$root/README.txt"; \
	mkdir -p dist; tar -C "$$work/out" -cJf "$(PACKAGE).tmp" fovea; mv "$(PACKAGE).tmp" "$(PACKAGE)"; \
	echo "wrote $(PACKAGE) ($$(du -h "$(PACKAGE)" | cut -f1)): unpack with tar -xJf, run fovea/usr/local/bin/fovea"

# check-install: what a user does, in temporary folders. Install into a new
# prefix, validate the desktop entry, run the installed binary from another
# folder with an empty cache and no FOVEA_ORT_LIB (so only the installed
# library can be found), then uninstall and check that the prefix is empty.
check-install: build
	@prefix=$$(mktemp -d "$${TMPDIR:-/tmp}/fovea-prefix.XXXXXX"); home=$$(mktemp -d "$${TMPDIR:-/tmp}/fovea-home.XXXXXX"); \
	trap 'rm -rf "$$prefix" "$$home"' EXIT; \
	$(MAKE) --no-print-directory install PREFIX="$$prefix" >/dev/null; \
	desktop-file-validate "$$prefix/share/applications/org.fovea.app.desktop"; \
	grep -qx "Exec=\"$$prefix/bin/fovea\" %f" "$$prefix/share/applications/org.fovea.app.desktop" || { echo "check-install: Exec line does not start $$prefix/bin/fovea" >&2; exit 1; }; \
	out=$$(cd "$$home" && env -u FOVEA_ORT_LIB -u LD_LIBRARY_PATH HOME="$$home" XDG_CACHE_HOME="$$home/cache" XDG_CONFIG_HOME="$$home/config" \
	  "$$prefix/bin/fovea" layers --verbose 2>&1); \
	grep -q "ONNX Runtime: *$$prefix/lib/fovea/libonnxruntime.so.1" <<<"$$out" || { echo "$$out" >&2; echo "check-install: the installed binary did not use $$prefix/lib/fovea" >&2; exit 1; }; \
	grep -q "/fc/Gemm" <<<"$$out" || { echo "$$out" >&2; echo "check-install: no layer table" >&2; exit 1; }; \
	[ ! -e "$$home/cache/fovea" ] || { echo "check-install: the installed binary wrote into the cache" >&2; exit 1; }; \
	$(MAKE) --no-print-directory uninstall PREFIX="$$prefix" >/dev/null; \
	left=$$(cd "$$prefix" && find . -mindepth 1); [ -z "$$left" ] || { echo "check-install: uninstall left: $$left" >&2; exit 1; }; \
	echo "check-install: installed, desktop entry valid, layers ran with the installed library from an empty home, uninstall left the prefix empty"

# check-package: unpack the tarball into an empty folder and run the demo
# with an empty cache, by the unpacked path and through a link from another
# folder (a link on the PATH is how many put it there); then its install.sh.
check-package: package
	@dir=$$(mktemp -d "$${TMPDIR:-/tmp}/fovea-unpack.XXXXXX"); trap 'rm -rf "$$dir"' EXIT; \
	mkdir -p "$$dir/home/bin" "$$dir/prefix"; tar -xJf "$(PACKAGE)" -C "$$dir"; \
	ln -s "$$dir/fovea/usr/local/bin/fovea" "$$dir/home/bin/fovea"; \
	for exe in "$$dir/fovea/usr/local/bin/fovea" "$$dir/home/bin/fovea"; do \
	  out=$$(cd "$$dir/home" && env -u FOVEA_ORT_LIB -u LD_LIBRARY_PATH HOME="$$dir/home" XDG_CACHE_HOME="$$dir/home/cache" XDG_CONFIG_HOME="$$dir/home/config" \
	    "$$exe" layers --verbose 2>&1); \
	  grep -q "ONNX Runtime: *$$dir/fovea/usr/local/lib/fovea/libonnxruntime.so.1" <<<"$$out" && grep -q "/fc/Gemm" <<<"$$out" || \
	    { echo "$$out" >&2; echo "check-package: $$exe did not run the demo with the bundled library" >&2; exit 1; }; \
	done; \
	[ -f "$$dir/fovea/usr/local/lib/fovea/LICENSE" ] && grep -q "MIT License" "$$dir/fovea/usr/local/lib/fovea/LICENSE" || { echo "check-package: no ONNX Runtime licence in the tarball" >&2; exit 1; }; \
	(cd "$$dir/fovea" && ./install.sh install usr/local "$$dir/prefix" >/dev/null && ./install.sh uninstall usr/local "$$dir/prefix" >/dev/null); \
	left=$$(cd "$$dir/prefix" && find . -mindepth 1); [ -z "$$left" ] || { echo "check-package: the tarball's uninstall left: $$left" >&2; exit 1; }; \
	echo "check-package: $(PACKAGE) unpacked; layers ran with the bundled library from an empty home, directly and through a link; its install.sh installs and uninstalls cleanly"

# check-export: runs the README's PyTorch export recipe against Debian's
# PyTorch (/usr/bin/python3) and opens the result with fovea layers and
# classify. Not part of `make test`: python3-torch is about 1 GB.
check-export: deps-export build ort
	@dir=$$(mktemp -d "$${TMPDIR:-/tmp}/fovea-export.XXXXXX"); trap 'rm -rf "$$dir"' EXIT; \
	/usr/bin/python3 testdata/export/export_torch.py "$$dir/classifier.onnx"; \
	$(BIN) layers --model "$$dir/classifier.onnx" --json > "$$dir/layers.json"; \
	$(BIN) classify --model "$$dir/classifier.onnx" --image assets/demo/images/$$(ls assets/demo/images | head -1) --k 3 --json > "$$dir/top.json"; \
	/usr/bin/python3 testdata/export/check_result.py "$$dir/classifier.onnx" "$$dir/layers.json" "$$dir/top.json" assets/demo/images/$$(ls assets/demo/images | head -1)

# refdata: regenerates the reference files that Python made once and the Go
# tests read (`make test` never runs Python): torchvision's resize/crop
# pictures, tensors and top-5 probabilities (modelio/prep/testdata/torchvision)
# and the kernels of real exports read by onnx's numpy_helper
# (modelio/testdata/onnxref), and SciPy's exact McNemar p-values
# (testdata/compare). Each run writes the same bytes; git diff shows
# any change.
refdata:
	@$(call install_debs,$(REFDATA_DEBS))
	/usr/bin/python3 modelio/prep/testdata/torchvision/gen_torchvision.py
	/usr/bin/python3 modelio/testdata/onnxref/gen_kernels.py
	/usr/bin/python3 testdata/compare/make_mcnemar.py
