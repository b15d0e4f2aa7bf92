#!/usr/bin/env bash
# Makes assets/fonts/DejaVuSans.ttf, the subset of DejaVu Sans 2.37 that bankstep embeds:
# Basic Latin, Latin-1, Latin Extended-A, Greek, general punctuation, super- and
# subscripts, the euro sign, arrows, the mathematical operators the figures use and a few
# geometric shapes; kerning kept, hinting dropped (the figures are drawn without it).
# A smaller font keeps the pages a report touches, and so its memory, small.
# Needs fontTools (`pip install fonttools`). Usage: subset.sh FULL-DejaVuSans.ttf
set -euo pipefail
cd "$(dirname "$0")"
pyftsubset "$1" \
  --unicodes="U+0020-007E,U+00A0-017F,U+0370-03FF,U+2010-2027,U+2030-203A,U+2070-209F,U+20AC,U+2116,U+2122,U+2126,U+2190-2195,U+2212,U+2215,U+2218-221E,U+2248,U+2260,U+2264-2265,U+22C5,U+25A0-25CF" \
  --layout-features='kern' --no-hinting --desubroutinize \
  --name-IDs='*' --name-legacy --name-languages='*' --notdef-outline \
  --output-file=DejaVuSans.ttf
