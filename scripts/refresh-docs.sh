#!/usr/bin/env bash
# Regenerates what the README shows from a fresh demo run: the walkthrough outputs (the code
# block after each `<!-- out:FILE -->` marker) and the pictures in docs/. Needs pdftoppm
# (Debian package poppler-utils). Run from anywhere: bash scripts/refresh-docs.sh
set -euo pipefail
cd "$(dirname "$0")/.."
export SOURCE_DATE_EPOCH=1796860800   # 2026-12-10T00:00:00Z, so the outputs are reproducible
demo=target/readme-demo
rm -rf "$demo"   # this script owns the folder; the demo itself refuses to delete what it did not write
cargo build --release --quiet
./target/release/resinlot demo "$demo" > target/readme-demo.txt
cp target/readme-demo.txt "$demo/outputs/00-demo.txt"
# Pictures: the first page of a customer certificate, the drifting hydroxyl-value chart, the
# hydroxyl-value page and the viscosity-Mn page (the last) of the PD-2000 trend report, and the
# cook chart (needs pdftotext and pdfinfo, also poppler-utils).
cert=$(ls "$demo"/certificates/F2611-D05_*.pdf | tail -n 1)
pdftoppm -png -r 80 -f 1 -l 1 -singlefile "$cert" docs/certificate
cp "$demo/outputs/pd-2000-hydroxyl-value.png" docs/control-chart.png
report="$demo/outputs/pd-2000-trend.pdf"
pages=$(pdfinfo "$report" | awk '/^Pages:/ {print $2}')
ohv=$(for p in $(seq 1 "$pages"); do
  pdftotext -f "$p" -l "$p" "$report" - | head -n 1 | grep -q '^Hydroxyl value' && { echo "$p"; break; }
done)
pdftoppm -png -r 80 -f "$ohv" -l "$ohv" -singlefile "$report" docs/trend-report
pdftoppm -png -r 80 -f "$pages" -l "$pages" -singlefile "$report" docs/viscosity-mn
./target/release/resinlot cook demo-lots/cooks/pd2000-200-a.csv --recipe specs/recipes/pd-2000.toml \
  --target-av 1.0 --chart target/readme-cook.png > /dev/null
cp target/readme-cook.png docs/cook-chart.png
# Page 2 of a multi-page certificate: the 40-property test fixture (invented values), written by
# its test when RESINLOT_SAMPLE_DIR is set.
samples="$PWD/target/readme-samples"
RESINLOT_SAMPLE_DIR="$samples" cargo test --quiet --test cli certificate_render::forty_properties > /dev/null
pdftoppm -png -r 80 -f 2 -l 2 -singlefile "$samples/forty.pdf" docs/certificate-page-2
python3 - "$demo/outputs" <<'PY'
import pathlib, re, sys
out = pathlib.Path(sys.argv[1])
readme = pathlib.Path("README.md")
text = readme.read_text()
def fill(m):
    name = m.group(1)
    body = (out / name).read_text().rstrip("\n")
    body = body.replace(str(out.parent) + "/", "").replace(str(out.parent), "resinlot-demo")
    return f"<!-- out:{name} -->\n```text\n{body}\n```"
text = re.sub(r"<!-- out:([\w.-]+) -->\n```text\n(?:.*?\n)?```", fill, text, flags=re.S)
readme.write_text(text)
PY
echo "README outputs and docs/*.png refreshed from $demo"
