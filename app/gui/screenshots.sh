#!/usr/bin/env bash
# Screenshots of Fovea's window, one per view, in the light and the dark
# theme, for the README and for looking at the layout. The real window runs
# under Xvfb (no display needed); each shot is cropped to the window.
#
#   app/gui/screenshots.sh [OUTDIR]        (default: assets/screenshots)
#
# Environment: FOVEA (binary, default: builds bin/fovea), FOVEA_MODEL,
# FOVEA_IMAGE, FOVEA_PROBE (default: the embedded demo, and for the health
# view its unhealthy twin scanning the demo's probe images, for the scorecard
# view the same twin evaluated on them; all by name or relative to the
# repository: the script passes no path of this machine), FOVEA_EXPECTED
# (the class the occlusion view explains against), SHOT_VIEWS, SHOT_THEMES,
# SHOT_WAIT (seconds to let a view settle, default 6).
# Needs Xvfb, ImageMagick (import, convert) and xwininfo.
set -euo pipefail
# Fyne reads the language from LANGUAGE before LANG; "C.UTF-8" alone makes it log a
# locale error.
export LANG=C.UTF-8 LC_ALL=C.UTF-8 LANGUAGE=en

root=$(cd "$(dirname "$0")/../.." && pwd)
out=$(realpath -m "${1:-$root/assets/screenshots}")
cd "$root" # the scorecard shot names its list relative to the repository
views=${SHOT_VIEWS:-"model kernels predict maps occlusion health scorecard patches"}
themes=${SHOT_THEMES:-"light dark"}
wait=${SHOT_WAIT:-6}
for tool in Xvfb import convert xwininfo; do
	command -v $tool >/dev/null || { echo "screenshots: $tool is missing (Debian: xvfb imagemagick x11-utils)" >&2; exit 1; }
done
bin=${FOVEA:-}
if [ -z "$bin" ]; then
	bin=$root/bin/fovea
	(cd "$root" && go build -o "$bin" ./app)
fi
mkdir -p "$out"

# A private display and preferences, so that shots do not depend on (or
# change) the user's remembered window size, view or theme.
display=:$((90 + RANDOM % 9))
Xvfb "$display" -screen 0 1400x900x24 -nolisten tcp >/dev/null 2>&1 &
xvfb=$!
home=$(mktemp -d)
cleanup() { kill "$xvfb" 2>/dev/null || true; rm -rf "$home"; }
trap cleanup EXIT
sleep 1
export DISPLAY=$display HOME=$home XDG_CONFIG_HOME=$home/.config XDG_CACHE_HOME=${XDG_CACHE_HOME:-$HOME/.cache}

args=()
[ -n "${FOVEA_MODEL:-}" ] && args+=(--model "$FOVEA_MODEL")
[ -n "${FOVEA_IMAGE:-}" ] && args+=(--image "$FOVEA_IMAGE")
for theme in $themes; do
	for view in $views; do
		extra=()
		[ "$view" = health ] && [ -n "${FOVEA_PROBE:-}" ] && extra+=(--probe "$FOVEA_PROBE")
		# The health view shows the demo's unhealthy twin, which has dead
		# filters, scanning the demo's own probe images: no path of this
		# machine is passed, so none can show in a shot.
		[ "$view" = health ] && [ -z "${FOVEA_MODEL:-}" ] && extra+=(--demo unhealthy)
		# The scorecard shows the unhealthy twin's mistakes on the demo's probe images.
		[ "$view" = scorecard ] && [ -z "${FOVEA_MODEL:-}" ] &&
			extra+=(--demo unhealthy --data assets/demo/probe/labels.csv)
		[ "$view" = occlusion ] && [ -n "${FOVEA_EXPECTED:-}" ] && extra+=(--expected "$FOVEA_EXPECTED")
		rm -rf "$home/.config"  # every shot starts from no remembered state
		"$bin" "${args[@]}" "${extra[@]}" --view "$view" --theme "$theme" >"$home/log" 2>&1 &
		app=$!
		sleep "$wait"
		shot=$out/$view-$theme.png
		geo=$(xwininfo -root -tree | grep -m1 '"Fovea' | grep -o '[0-9]*x[0-9]*+[0-9]*+[0-9]*' | head -1 || true)
		import -window root "$home/full.png"
		if [ -n "$geo" ]; then
			convert "$home/full.png" -crop "$geo" +repage "$shot"
		else
			cp "$home/full.png" "$shot"
		fi
		kill "$app" 2>/dev/null || true
		for _ in 1 2 3 4 5 6 7 8 9 10; do kill -0 "$app" 2>/dev/null || break; sleep 0.5; done
		if kill -0 "$app" 2>/dev/null; then
			echo "screenshots: $view ($theme) did not exit on SIGTERM; its goroutines:" >&2
			kill -QUIT "$app" 2>/dev/null || true
			sleep 1
			kill -KILL "$app" 2>/dev/null || true
		fi
		wait "$app" 2>/dev/null || true
		if grep -qi 'error\|panic\|goroutine' "$home/log"; then
			echo "screenshots: $view ($theme) logged:" >&2
			cat "$home/log" >&2
		fi
		echo "$shot"
	done
done
