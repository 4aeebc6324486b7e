#!/usr/bin/env bash
# `veq demo --report`: the series' PDF report holds the back-titrated
# nickel result, the method and its version, and the signature line
# (pdftotext, poppler-utils); page 1 renders to an image.
# Usage: cli_demo_report.sh <veq> <scratch folder>
set -euo pipefail
veq="$1"
dir="$2"
rm -rf "$dir" && mkdir -p "$dir"
"$veq" demo --db "$dir/demo.sqlite" --report "$dir/series.pdf" >"$dir/demo.txt"
text=$(pdftotext -layout "$dir/series.pdf" -)
# The nickel vessel holds 0.95 mmol/L = 55.758 mg/L (the demo scenario's
# hidden truth, 58.693 g/mol); the report prints the found mean.
nickel=$(grep "Brassworks rinse .* sample " <<<"$text" | grep -o " 5[0-9]\.[0-9]* " | head -1)
awk -v v="$nickel" 'BEGIN { exit !(v > 55.6 && v < 55.9) }'
grep -q "calcium in drinking water, version 1" <<<"$text"
grep -q "Reviewed and signed" <<<"$text"
pdftoppm -png -r 40 -f 1 -l 1 "$dir/series.pdf" "$dir/page"
[ -s "$dir/page-1.png" ] || [ -s "$dir/page-01.png" ]
echo "series report checked: nickel $nickel mg/L"
