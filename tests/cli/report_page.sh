#!/usr/bin/env bash
# report_page.sh — `tessera report` through the real binary: train a tiny model on the
# committed sample WAVs, build the listening page, check that every file the HTML links
# exists, every WAV is valid and as long as its source, then open the page in headless
# Chromium (browser_check.py) and keep a screenshot as a test artifact.
# Usage: report_page.sh TESSERA_BINARY SOURCE_DIR
. "$(dirname "$0")/../cli_common.sh" "$@"
artifacts=$(cd "$(dirname "$bin")" && pwd)/test-artifacts
mkdir -p "$artifacts"

train_tiny_model "$bin" "$src/samples" "$work/run" >"$work/train.log"
model=$work/run/model.safetensors
"$bin" report --model "$model" "$src"/samples/*.wav -o "$work/page" --depths 1,3 >"$work/report.log" ||
  { cat "$work/report.log"; fail "report failed"; }
cat "$work/report.log"
grep -q "index.html" "$work/report.log" || fail "report does not say where the page is"

/usr/bin/python3 - "$work/page" "$src/samples" <<'PY' || fail "the page links a missing or broken file"
import html.parser, os, sys, wave
page, samples = sys.argv[1], sys.argv[2]
class Links(html.parser.HTMLParser):
    def __init__(self):
        super().__init__()
        self.links, self.tags = [], {}
    def handle_starttag(self, tag, attrs):
        self.tags[tag] = self.tags.get(tag, 0) + 1
        for k, v in attrs:
            if k in ("src", "href"):
                self.links.append((tag, v))
p = Links()
p.feed(open(os.path.join(page, "index.html"), encoding="utf-8").read())
assert p.links, "no links"
for tag, link in p.links:
    assert "://" not in link and not link.startswith("/"), f"{link}: not a file beside the page (no network, no absolute paths)"
    assert os.path.isfile(os.path.join(page, link)), f"{link} is missing"
assert p.tags.get("script", 0) == 0, "the page carries a script"
wavs = [l for t, l in p.links if t == "audio"]
sources = sorted(f for f in os.listdir(samples) if f.endswith(".wav"))
# 4 inputs x (original, oracle, depth 1, depth 3)
assert len(wavs) == 4 * len(sources), wavs
for i, name in enumerate(sources):
    with wave.open(os.path.join(samples, name)) as w:
        want = w.getnframes() / w.getframerate()
    for v in ("original", "oracle", "depth-1", "depth-3"):
        f = f"input-{i + 1}-{v}.wav"
        assert f in wavs, f"{f} not on the page"
        with wave.open(os.path.join(page, f)) as w:
            assert w.getnchannels() == 1 and w.getsampwidth() == 2 and w.getframerate() == 16000, f
            got = w.getnframes() / w.getframerate()
        # Decoded versions end at the last whole code frame (4 feature frames = 40 ms).
        assert abs(got - want) < (0.01 if v in ("original", "oracle") else 0.05), f"{f}: {got:.3f} s, its source {name} lasts {want:.3f} s"
for t, l in p.links:
    if l.endswith(".png"):
        assert open(os.path.join(page, l), "rb").read(8) == b"\x89PNG\r\n\x1a\n", l
    if l.endswith(".svg"):
        assert open(os.path.join(page, l)).read().startswith("<svg"), l
print(f"page: {len(p.links)} linked files, {len(wavs)} players, all present and valid")
PY

set +e
/usr/bin/python3 "$src/tests/cli/browser_check.py" "$work/page/index.html" "$artifacts/report-page.png"
rc=$?
set -e
[ $rc -eq 77 ] && { echo "browser part skipped (see above)"; exit 0; }
[ $rc -eq 0 ] || fail "the page does not work in a browser"

# Refusals: a bad depth list, and never writing the report over its inputs.
set +e
"$bin" report --model "$model" "$src/samples/example-safety.wav" -o "$work/p2" --depths 2,1 2>"$work/err"; rc=$?
set -e
[ $rc -ne 0 ] && grep -q "increasing" "$work/err" || fail "--depths 2,1 was not refused: $(cat "$work/err")"
cp "$src/samples/example-safety.wav" "$work/in.wav"
set +e
"$bin" report --model "$model" "$work/in.wav" -o "$work" 2>"$work/err"; rc=$?
set -e
[ $rc -ne 0 ] && grep -q "holds the input" "$work/err" || fail "report into the input's folder was not refused: $(cat "$work/err")"
echo "report page checks passed"
