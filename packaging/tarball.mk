# Installs the unpacked Fovea tarball; no root needed with the default PREFIX.
#   make install              # into ~/.local
#   make install PREFIX=DIR   # anywhere else
#   make uninstall [PREFIX=DIR]
PREFIX ?= $(HOME)/.local

.PHONY: default install uninstall
default:
	@echo "Run Fovea in place: ./usr/local/bin/fovea   Install: make install [PREFIX=DIR] (default ~/.local)   Remove: make uninstall"

install:
	./install.sh install usr/local "$(PREFIX)"

uninstall:
	./install.sh uninstall usr/local "$(PREFIX)"
