#!/usr/bin/env bash
# Render a plaudit HTML report in headless Chromium and check that it draws.
#
# Usage: scripts/render_report.sh [REPORT.html]
#   Without an argument, makes a small stalled run of its own (plaudit synth + train, seeded)
#   and its report. Writes page.png and one PNG per chart to $RENDER_OUT (default: a temporary
#   directory, printed), then checks with /usr/bin/python3 (a PNG decoder in pure Python, on
#   zlib: PIL is not needed) that the page is not blank and that every chart has drawn data in
#   colour, not only axes.
# Chromium (the Debian package `chromium`) is installed when missing and running as root;
# otherwise, or when it cannot be installed, the script says that it skips and exits 0.
# Environment: PLAUDIT (the plaudit binary; default build/plaudit, built when missing),
# RENDER_OUT (output directory).
set -euo pipefail

ROOT="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
PLAUDIT="${PLAUDIT:-$ROOT/build/plaudit}"
PY=/usr/bin/python3

skip() {
  echo "render_report: SKIP: $*"
  exit 0
}

if [ ! -x "$PY" ]; then skip "/usr/bin/python3 is not installed, so the PNG cannot be checked"; fi

find_chromium() {
  command -v chromium || command -v chromium-browser || true
}
CHROMIUM="$(find_chromium)"
if [ -z "$CHROMIUM" ]; then
  if [ "$(id -u)" -ne 0 ]; then
    skip "chromium is not installed and installing it needs root (apt-get install chromium)"
  fi
  echo "render_report: installing chromium (Debian package)"
  export DEBIAN_FRONTEND=noninteractive
  if ! { apt-get update -qq && apt-get install -y -qq --no-install-recommends chromium >/dev/null; }; then
    skip "chromium could not be installed with apt-get"
  fi
  CHROMIUM="$(find_chromium)"
  [ -n "$CHROMIUM" ] || skip "chromium installed but not found on PATH"
fi

OUT="${RENDER_OUT:-$(mktemp -d "${TMPDIR:-/tmp}/plaudit-render.XXXXXX")}"
mkdir -p "$OUT"
OUT="$(cd "$OUT" && pwd)"

REPORT="${1:-}"
if [ -z "$REPORT" ]; then
  if [ ! -x "$PLAUDIT" ]; then
    echo "render_report: building plaudit in $ROOT/build"
    cmake -S "$ROOT" -B "$ROOT/build" -DCMAKE_BUILD_TYPE=Release >/dev/null
    cmake --build "$ROOT/build" -j "$(nproc)" --target plaudit >/dev/null
  fi
  # A student of 8 + 8 tanh units on a planted ReLU teacher, stopped early: a run with every chart.
  "$PLAUDIT" synth -o "$OUT/data.npz" --dim 4 --width 4 --rows 600 --seed 3 >/dev/null
  "$PLAUDIT" train "$OUT/data.npz" -o "$OUT/run" --widths 8,8 --steps 400 --save-every 20 --seed 2 -q --overwrite
  REPORT="$OUT/report.html"
  status=0
  "$PLAUDIT" report "$OUT/run" -o "$REPORT" --features 256 --permutations 99 --probes 4000 || status=$?
  if [ "$status" -ge 64 ]; then
    echo "render_report: plaudit report failed with exit status $status" >&2
    exit 1
  fi
fi
[ -f "$REPORT" ] || { echo "render_report: $REPORT: no such file" >&2; exit 1; }
REPORT="$(cd "$(dirname "$REPORT")" && pwd)/$(basename "$REPORT")"

# One profile per call, so that concurrent runs never share Chromium's lock.
shoot() {  # shoot FILE PNG WIDTH HEIGHT
  local profile
  profile="$(mktemp -d "$OUT/profile.XXXXXX")"
  timeout 180 "$CHROMIUM" --headless --no-sandbox --disable-gpu --hide-scrollbars --no-first-run \
    --user-data-dir="$profile" --window-size="$3,$4" --screenshot="$2" "file://$1" >/dev/null 2>&1 || true
  rm -rf "$profile"
  [ -s "$2" ] || { echo "render_report: chromium wrote no $2" >&2; exit 1; }
}

# Each chart on its own page, at its own size.
"$PY" - "$REPORT" "$OUT" >"$OUT/charts.txt" <<'EOF'
import sys, xml.dom.minidom
report, out = sys.argv[1], sys.argv[2]
doc = xml.dom.minidom.parse(report)
for svg in doc.getElementsByTagName("svg"):
    name = svg.getAttribute("data-chart")
    path = f"{out}/chart-{name}.svg"
    with open(path, "w", encoding="utf-8") as f:
        f.write(svg.toxml())
    print(name, path, svg.getAttribute("width"), svg.getAttribute("height"))
EOF

shoot "$REPORT" "$OUT/page.png" 1200 2400
while read -r name path width height; do
  shoot "$path" "$OUT/chart-$name.png" "$width" "$height"
done <"$OUT/charts.txt"

"$PY" - "$OUT" <<'EOF'
import struct, sys, zlib

def decode_png(path):
    """Pixels of an 8-bit, non-interlaced PNG as rows of (r, g, b) tuples (PNG spec, ISO/IEC 15948)."""
    data = open(path, "rb").read()
    if data[:8] != b"\x89PNG\r\n\x1a\n":
        raise ValueError(f"{path}: not a PNG")
    pos, idat, palette = 8, b"", None
    while pos < len(data):
        length, kind = struct.unpack(">I4s", data[pos:pos + 8])
        body = data[pos + 8:pos + 8 + length]
        pos += 12 + length
        if kind == b"IHDR":
            width, height, depth, colour, _, _, interlace = struct.unpack(">IIBBBBB", body)
        elif kind == b"PLTE":
            palette = [tuple(body[i:i + 3]) for i in range(0, len(body), 3)]
        elif kind == b"IDAT":
            idat += body
        elif kind == b"IEND":
            break
    if depth != 8 or interlace != 0:
        raise ValueError(f"{path}: bit depth {depth}, interlace {interlace} not handled")
    channels = {0: 1, 2: 3, 3: 1, 4: 2, 6: 4}[colour]
    raw = zlib.decompress(idat)
    stride = width * channels
    prev = bytearray(stride)
    rows = []
    for y in range(height):
        start = y * (stride + 1)
        kind = raw[start]
        line = bytearray(raw[start + 1:start + 1 + stride])
        if kind == 1:
            for i in range(channels, stride):
                line[i] = (line[i] + line[i - channels]) & 0xFF
        elif kind == 2:
            line = bytearray((a + b) & 0xFF for a, b in zip(line, prev))
        elif kind == 3:
            for i in range(stride):
                left = line[i - channels] if i >= channels else 0
                line[i] = (line[i] + ((left + prev[i]) >> 1)) & 0xFF
        elif kind == 4:
            for i in range(stride):
                a = line[i - channels] if i >= channels else 0
                b = prev[i]
                c = prev[i - channels] if i >= channels else 0
                p = a + b - c
                pa, pb, pc = abs(p - a), abs(p - b), abs(p - c)
                pred = a if pa <= pb and pa <= pc else (b if pb <= pc else c)
                line[i] = (line[i] + pred) & 0xFF
        elif kind != 0:
            raise ValueError(f"{path}: bad filter {kind} in row {y}")
        prev = line
        if colour == 2:
            rows.append([tuple(line[i:i + 3]) for i in range(0, stride, 3)])
        elif colour == 6:
            rows.append([tuple(line[i:i + 3]) for i in range(0, stride, 4)])
        elif colour == 3:
            rows.append([palette[v] for v in line])
        else:
            rows.append([(v, v, v) for v in line[::channels]])
    return width, height, rows

def measure(path):
    width, height, rows = decode_png(path)
    total = width * height
    ink = sum(1 for row in rows for (r, g, b) in row if min(r, g, b) < 235)
    # Data are drawn in the palette's colours; axes, grid and text are grey or black.
    colour = sum(1 for row in rows for (r, g, b) in row if max(r, g, b) - min(r, g, b) > 60)
    return total, ink, colour

out = sys.argv[1]
failures = []
total, ink, colour = measure(f"{out}/page.png")
print(f"render_report: page.png: {ink / total:.1%} of pixels inked, {colour} in colour")
if ink < 0.02 * total or colour < 500:
    failures.append("page.png looks blank")
charts = [line.split() for line in open(f"{out}/charts.txt") if line.strip()]
if not charts:
    failures.append("the report has no charts")
for name, _, _, _ in charts:
    total, ink, colour = measure(f"{out}/chart-{name}.png")
    print(f"render_report: chart {name}: {ink / total:.1%} inked, {colour} pixels in colour")
    if ink < 0.01 * total or colour < 40:
        failures.append(f"chart {name} has no drawn data")
if failures:
    print("render_report: FAIL: " + "; ".join(failures))
    sys.exit(1)
print(f"render_report: OK: the page and its {len(charts)} charts draw ({out})")
EOF
