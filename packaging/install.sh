#!/bin/bash
# Installs Fovea from a folder laid out like a prefix (bin/, lib/fovea/,
# share/...) into PREFIX, or removes exactly those files again.
#
#   install.sh install   SRC PREFIX
#   install.sh uninstall SRC PREFIX
#
# `make install` / `make uninstall` in the source tree call it with a staging
# folder; the packaged tarball carries it and calls it with its usr/local.
# Only the files in FILES are written or removed, so uninstalling leaves
# everything else in PREFIX alone; folders are removed only when empty.
set -euo pipefail

FILES=(
  bin/fovea
  lib/fovea/libonnxruntime.so.1
  lib/fovea/LICENSE
  share/applications/org.fovea.app.desktop
  share/icons/hicolor/256x256/apps/org.fovea.app.png
  share/mime/packages/org.fovea.app.xml
)
# What update-mime-database writes next to packages/; removed on uninstall
# only when packages/ is left empty, since then they describe nothing.
MIME_GENERATED=(mime.cache globs globs2 magic aliases subclasses types icons generic-icons XMLnamespaces treemagic version)

die() { echo "install.sh: $*" >&2; exit 1; }

[ $# -eq 3 ] || die "usage: install.sh install|uninstall SRC PREFIX"
action=$1 src=$2 prefix=$3
[ -n "$prefix" ] || die "PREFIX is empty"
prefix=$(realpath -m -- "$prefix")
case $prefix in
  *[\"\`\$\\%]*) die "PREFIX $prefix contains a quote, backtick, dollar, backslash or percent sign, which a desktop entry's Exec line cannot carry" ;;
esac

mode_of() {
  case $1 in bin/*|*.so.1) echo 0755 ;; *) echo 0644 ;; esac
}

refresh_caches() {
  if command -v update-desktop-database >/dev/null 2>&1 && [ -d "$prefix/share/applications" ]; then
    update-desktop-database -q "$prefix/share/applications" || echo "install.sh: warning: update-desktop-database failed" >&2
  fi
  if command -v update-mime-database >/dev/null 2>&1 && [ -d "$prefix/share/mime/packages" ]; then
    update-mime-database "$prefix/share/mime" >/dev/null 2>&1 || echo "install.sh: warning: update-mime-database failed" >&2
  fi
}

case $action in
install)
  for f in "${FILES[@]}"; do
    [ -f "$src/$f" ] || die "$src/$f is missing"
  done
  for f in "${FILES[@]}"; do
    install -D -m "$(mode_of "$f")" "$src/$f" "$prefix/$f"
  done
  # The menu starts the installed binary by its full path: PREFIX/bin need
  # not be on the PATH of the desktop session.
  sed -i "s|^Exec=fovea |Exec=\"$prefix/bin/fovea\" |" "$prefix/share/applications/org.fovea.app.desktop"
  refresh_caches
  echo "installed Fovea into $prefix: ${FILES[*]}"
  case ":$PATH:" in *":$prefix/bin:"*) ;; *) echo "note: $prefix/bin is not on your PATH; the application menu entry works anyway" ;; esac
  ;;
uninstall)
  for f in "${FILES[@]}"; do
    rm -f -- "$prefix/$f"
  done
  refresh_caches
  apps=$prefix/share/applications
  if [ -d "$apps" ] && ! compgen -G "$apps/*.desktop" >/dev/null; then
    rm -f -- "$apps/mimeinfo.cache"
  fi
  mime=$prefix/share/mime
  if [ -d "$mime/packages" ] && [ -z "$(ls -A "$mime/packages")" ]; then
    for g in "${MIME_GENERATED[@]}"; do rm -f -- "$mime/$g"; done
    find "$mime" -mindepth 1 -type d -empty -delete
  fi
  # Remove the folders the files were in, deepest first, when nothing else is there.
  for f in "${FILES[@]}"; do
    d=$(dirname -- "$prefix/$f")
    while [ "$d" != "$prefix" ] && [ "${d#"$prefix"/}" != "$d" ]; do
      if [ -d "$d" ]; then rmdir -- "$d" 2>/dev/null || break; fi
      d=$(dirname -- "$d")
    done
  done
  echo "removed Fovea from $prefix"
  ;;
*) die "unknown action $action (install or uninstall)" ;;
esac
