#!/usr/bin/env bash
# Re-run ngspice live on the committed reference netlists and fail on any drift from the
# committed output (reference-tables/ngspice/).
set -euo pipefail
python3 scripts/make_ngspice_refs.py --check
