#!/usr/bin/env bash
# `rimwatch report` in a real browser: Debian's chromium, headless.
#   report_browser_test.sh RIMWATCH_BIN WORK_DIR
# Builds a log with `rimwatch replay --db` on an invented scenario with a break, writes the
# report, then checks with chromium that
#   1. loading it logs no console message (errors, warnings, uncaught exceptions);
#   2. the DOM chromium builds (--dump-dom) holds the charts: <svg> elements with the expected
#      ids, each with its data path;
#   3. a screenshot is not blank: decoded by hand (zlib from Python's standard library), it has
#      many distinct colours, a share of non-white pixels and pixels of the estimate's blue.
# Each check is first shown to fail on a page made to fail it (a script error, a blank page), so
# a broken check cannot pass silently. Without /usr/bin/chromium the test FAILS (CI installs it
# through setup.sh); it never skips.
set -euo pipefail

bin=${1:?usage: report_browser_test.sh RIMWATCH_BIN WORK_DIR}
work=${2:?usage: report_browser_test.sh RIMWATCH_BIN WORK_DIR}
chromium=/usr/bin/chromium
py=/usr/bin/python3

fail() {
  echo "FAIL: $*" >&2
  exit 1
}

[ -x "$chromium" ] || fail "$chromium not found: install Debian's chromium package" \
  "(apt-get install chromium; setup.sh lists it)"
[ -x "$py" ] || fail "$py not found"

rm -rf "$work"
mkdir -p "$work"
export HOME="$work/home"
mkdir -p "$HOME"

# The scenario: a and b follow a calm VAR(1) for 600 days; then a turns persistent and b leads a.
"$py" - "$work/history.csv" <<'PY'
import datetime, random, sys
rng = random.Random(424242)
a = b = 0.0
day = datetime.date(2020, 3, 2)
with open(sys.argv[1], "w") as f:
    f.write("period,a,b\n")
    for t in range(1, 1201):
        e1, e2 = rng.gauss(0, 1), rng.gauss(0, 1)
        a_next = 0.3 * a + e1 if t <= 600 else 0.97 * a + 0.5 * b + e1
        b = 0.4 * b + e2
        a = a_next
        f.write(f"{day.isoformat()},{a!r},{b!r}\n")
        day += datetime.timedelta(days=1)
PY
cat >"$work/desk.toml" <<'TOML'
name = "desk"
variables = ["a", "b"]
lags = 1
[window]
kind = "sliding"
rows = 200
[training]
rows = 200
[[restriction]]
name = "b-does-not-lead-a"
granger = { cause = ["b"], effect = ["a"] }
TOML

"$bin" replay --spec "$work/desk.toml" --csv "$work/history.csv" --db "$work/desk.sqlite" \
  >"$work/replay.out" 2>"$work/replay.err" || fail "rimwatch replay failed: $(cat "$work/replay.err")"
"$bin" report --db "$work/desk.sqlite" --out "$work/report.html" 2>"$work/report.err" ||
  fail "rimwatch report failed: $(cat "$work/report.err")"

# One headless chromium run: $1 = what to do (--dump-dom or --screenshot=FILE), $2 = the page,
# $3 = where its stderr (the browser log, with console messages) goes. Output on stdout.
run_chromium() {
  timeout 120 "$chromium" --headless --no-sandbox --disable-gpu --disable-background-networking \
    --enable-logging=stderr --v=0 --no-first-run --no-default-browser-check \
    --user-data-dir="$work/profile" --window-size=1200,2400 --hide-scrollbars \
    --virtual-time-budget=3000 "$1" "file://$2" 2>"$3"
}

# Console messages in chromium's log: "...:CONSOLE(line)] "text", source: URL (line)", or the
# newer "...:CONSOLE:line] ...". Any of them counts: the report logs nothing when it works.
console_lines() { grep -E 'CONSOLE[(:]' "$1" || true; }

# --- 1. The console check can fail: a page with a script error. ---------------------------
cat >"$work/broken.html" <<'HTML'
<!DOCTYPE html><html><head><meta charset="utf-8"><title>broken</title></head>
<body><p>x</p><script>undefinedFunctionOfThisTest();</script></body></html>
HTML
run_chromium --dump-dom "$work/broken.html" "$work/broken.log" >"$work/broken.dom" ||
  fail "chromium did not run (see $work/broken.log)"
[ -n "$(console_lines "$work/broken.log")" ] ||
  fail "the console check does not see a script error (chromium log: $work/broken.log)"

# --- 2. The report: no console message, the charts in the DOM. -----------------------------
run_chromium --dump-dom "$work/report.html" "$work/dom.log" >"$work/report.dom" ||
  fail "chromium --dump-dom failed (see $work/dom.log)"
messages=$(console_lines "$work/dom.log")
[ -z "$messages" ] || fail "console messages while loading the report:"$'\n'"$messages"

"$py" - "$work/report.dom" <<'PY' || fail "the DOM chromium built lacks charts"
import re, sys
from html.parser import HTMLParser

class Charts(HTMLParser):
    def __init__(self):
        super().__init__()
        self.svgs = {}      # id -> number of data paths inside
        self.current = None
        self.tables = 0
    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "svg":
            self.current = a.get("id")
            if self.current is None:
                raise SystemExit("an svg without id in the DOM")
            self.svgs[self.current] = 0
        elif tag == "path" and self.current and "data" in (a.get("class") or "").split():
            if len(re.findall(r"[ML]", a.get("d", ""))) >= 2:
                self.svgs[self.current] += 1
        elif tag == "circle" and self.current and a.get("class") == "eig-last":
            self.svgs[self.current] += 1
        elif tag == "table" and "events" in (a.get("class") or ""):
            self.tables += 1
    def handle_endtag(self, tag):
        if tag == "svg":
            self.current = None

p = Charts()
p.feed(open(sys.argv[1], encoding="utf-8").read())
expected = ["m1-rho", "m1-eigen", "m1-restriction.b-does-not-lead-a-pvalue",
            "m1-restriction.b-does-not-lead-a", "m1-cusum", "m1-volatility",
            "m1-constancy.nyblom_hansen", "m1-constancy.reference_equality",
            "m1-coef-a-const", "m1-coef-a-L1.a", "m1-coef-a-L1.b"]
missing = [i for i in expected if p.svgs.get(i, 0) == 0]
if missing:
    raise SystemExit("charts missing or without data in the DOM: " + ", ".join(missing))
if "m1-timeline" not in p.svgs:
    raise SystemExit("no alert timeline in the DOM")
if p.tables != 1:
    raise SystemExit("expected one events table, found %d" % p.tables)
print("DOM: %d svg charts, all %d expected ones with data" % (len(p.svgs), len(expected)))
PY

# --- 3. Screenshots: a blank page is seen as blank, the report is not. ----------------------
cat >"$work/blank.html" <<'HTML'
<!DOCTYPE html><html><head><meta charset="utf-8"><title>blank</title></head><body></body></html>
HTML
run_chromium --screenshot="$work/blank.png" "$work/blank.html" "$work/blank.log" >/dev/null ||
  fail "chromium --screenshot failed on the blank page (see $work/blank.log)"
run_chromium --screenshot="$work/report.png" "$work/report.html" "$work/shot.log" >/dev/null ||
  fail "chromium --screenshot failed (see $work/shot.log)"
messages=$(console_lines "$work/shot.log")
[ -z "$messages" ] || fail "console messages while taking the screenshot:"$'\n'"$messages"

cat >"$work/png_stats.py" <<'PY'
# Decodes an 8-bit RGB or RGBA PNG by hand (zlib + the five scanline filters of the PNG
# specification, W3C PNG 2nd edition, Sec. 9) and prints: width height distinct_colours
# non_white_share estimate_blue_pixels.
import struct, sys, zlib

data = open(sys.argv[1], "rb").read()
if data[:8] != b"\x89PNG\r\n\x1a\n":
    raise SystemExit("not a PNG")
pos, idat, width = 8, b"", 0
while pos < len(data):
    length, kind = struct.unpack(">I4s", data[pos:pos + 8])
    body = data[pos + 8:pos + 8 + length]
    if kind == b"IHDR":
        width, height, depth, colour, _, _, interlace = struct.unpack(">IIBBBBB", body)
        if depth != 8 or colour not in (2, 6) or interlace != 0:
            raise SystemExit("unsupported PNG: depth %d colour %d interlace %d"
                             % (depth, colour, interlace))
        bpp = 3 if colour == 2 else 4
    elif kind == b"IDAT":
        idat += body
    pos += 12 + length
raw = zlib.decompress(idat)
stride = width * bpp
prev = bytearray(stride)
colours, non_white, blue = set(), 0, 0
for y in range(height):
    f = raw[y * (stride + 1)]
    line = bytearray(raw[y * (stride + 1) + 1:(y + 1) * (stride + 1)])
    for i in range(stride):
        a = line[i - bpp] if i >= bpp else 0
        b = prev[i]
        c = prev[i - bpp] if i >= bpp else 0
        if f == 1:
            line[i] = (line[i] + a) & 255
        elif f == 2:
            line[i] = (line[i] + b) & 255
        elif f == 3:
            line[i] = (line[i] + (a + b) // 2) & 255
        elif f == 4:
            p = a + b - c
            pa, pb, pc = abs(p - a), abs(p - b), abs(p - c)
            line[i] = (line[i] + (a if pa <= pb and pa <= pc else b if pb <= pc else c)) & 255
    for x in range(0, stride, bpp):
        r, g, bl = line[x], line[x + 1], line[x + 2]
        colours.add((r, g, bl))
        if r < 235 or g < 235 or bl < 235:
            non_white += 1
        # the estimate's blue (#1d5b82) and its anti-aliased neighbours
        if abs(r - 0x1d) < 40 and abs(g - 0x5b) < 40 and abs(bl - 0x82) < 40 and bl > r + 60:
            blue += 1
    prev = line
print(width, height, len(colours), "%.4f" % (non_white / (width * height)), blue)
PY
read -r bw bh bcolours bshare bblue < <("$py" "$work/png_stats.py" "$work/blank.png") ||
  fail "cannot decode $work/blank.png"
read -r w h colours share blue < <("$py" "$work/png_stats.py" "$work/report.png") ||
  fail "cannot decode $work/report.png"
echo "blank page: ${bw}x${bh}, $bcolours colours, non-white share $bshare, blue pixels $bblue"
echo "report:     ${w}x${h}, $colours colours, non-white share $share, blue pixels $blue"
echo "screenshot: $work/report.png"
"$py" - "$bcolours" "$bshare" "$colours" "$share" "$blue" <<'PY' || exit 1
import sys
bcolours, bshare, colours, share, blue = (float(v) for v in sys.argv[1:])
problems = []
if not (bcolours <= 2 and bshare < 0.001):
    problems.append("the blankness check does not see a blank page as blank")
if colours < 50:
    problems.append("only %d distinct colours in the report screenshot" % colours)
if share < 0.05:
    problems.append("only %.1f%% of the report screenshot is not white" % (100 * share))
if blue < 500:
    problems.append("only %d pixels of the estimate's blue: no data lines drawn?" % blue)
if problems:
    print("FAIL: " + "; ".join(problems), file=sys.stderr)
    sys.exit(1)
PY
echo "PASS: report renders in chromium without console messages; charts in the DOM; screenshot not blank"
