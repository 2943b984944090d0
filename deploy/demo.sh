#!/usr/bin/env bash
# The README's run command. Installs what is missing, builds, and runs the demo: for now the search
# core in-process tuning a simulated solver farm (the server demo replaces it once ogived lands).
set -euo pipefail
cd "$(dirname "$0")/.."

bash deploy/install-deps.sh
cmake --preset ci > /dev/null
cmake --build --preset ci -j "$(nproc)" --target ogive-demo-search
./build/ci/tests/demo/ogive-demo-search
