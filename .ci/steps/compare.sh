#!/usr/bin/env bash
# Speed of analyze against ngspice and numpy on the demo design, after checking that all three
# compute the same response (fails only when they disagree; the speed targets are reported).
set -euo pipefail
bash scripts/compare-ngspice.sh --short
