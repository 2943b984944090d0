#!/usr/bin/env bash
# Builds ogive and runs every test: the README's test command, and what CI runs.
# Installs missing Debian packages first (headless Chromium too, for the report's rendering test),
# configures the `ci` preset (optimized, assertions kept, warnings are errors), builds, and runs ctest.
set -euo pipefail
cd "$(dirname "$0")/.."

bash deploy/install-deps.sh --report-tests
cmake --preset ci
cmake --build --preset ci -j "$(nproc)"
ctest --preset ci -j "$(nproc)" --timeout 1200
