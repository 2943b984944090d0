#!/usr/bin/env bash
# Installs the Debian 12 packages ogive needs to build, test and run. Idempotent: packages already
# present are left alone, and `apt-get update` runs only when something is missing.
set -euo pipefail

packages=(
  build-essential g++ cmake ninja-build pkg-config
  libgrpc++-dev protobuf-compiler-grpc libprotobuf-dev protobuf-compiler
  libeigen3-dev libabsl-dev libsqlite3-dev sqlite3
  libgtest-dev libgmock-dev
  libssl-dev openssl
  libcpp-httplib-dev
  libjemalloc-dev  # ogived's allocator (CMakeLists.txt says why)
  clang libclang-rt-14-dev  # the `fuzz` and `tsan` presets: clang++, libFuzzer, the sanitizer runtimes
  python3-numpy python3-scipy python3-grpcio python3-protobuf
  python3-prometheus-client python3-yaml
  systemd
)

# With --report-tests: what the report's rendering test needs (tests/report/report_render_test.py):
# headless Chromium, which is large (a few hundred MB), and PIL to count the screenshot's pixels.
# Without chromium that test is skipped; deploy/check.sh asks for both.
if [ "${1:-}" = "--report-tests" ]; then
  packages+=(chromium python3-pil)
fi

missing=()
for p in "${packages[@]}"; do
  if ! dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed"; then
    missing+=("$p")
  fi
done

if [ ${#missing[@]} -eq 0 ]; then
  echo "install-deps: all ${#packages[@]} packages present"
  exit 0
fi

echo "install-deps: installing ${missing[*]}"
sudo_cmd=()
if [ "$(id -u)" -ne 0 ]; then sudo_cmd=(sudo); fi
export DEBIAN_FRONTEND=noninteractive
"${sudo_cmd[@]}" apt-get update -qq
"${sudo_cmd[@]}" apt-get install -y -qq --no-install-recommends "${missing[@]}"
