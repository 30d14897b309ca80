#!/usr/bin/env bash
# Take a fresh Debian 12 (or Ubuntu 22.04+) machine to a built spinflip tree.
# Idempotent and non-interactive: re-running only installs what is missing and
# rebuilds incrementally.
#
#   deploy/install-debian.sh            # packages + Release build in ./build
#   SPINFLIP_BUILD_TYPE=Debug deploy/install-debian.sh
#   SPINFLIP_SKIP_APT=1 deploy/install-debian.sh   # build only
set -euo pipefail

here=$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)
build_dir=${SPINFLIP_BUILD_DIR:-$here/build}
build_type=${SPINFLIP_BUILD_TYPE:-Release}

packages=(
  build-essential cmake git pkg-config ca-certificates
  openmpi-bin libopenmpi-dev
  libhdf5-openmpi-dev hdf5-tools
  libfftw3-dev libfftw3-mpi-dev
  libspdlog-dev libfmt-dev
  libgtest-dev libgmock-dev libbenchmark-dev
  libtomlplusplus-dev libcli11-dev libeigen3-dev librandom123-dev
  libssl-dev
  clang-16 libclang-rt-16-dev  # deploy/hardening.sh: sanitizers and libFuzzer (clang 16 reads libstdc++ 12's <source_location>)
  python3 python3-numpy python3-scipy python3-h5py python3-astropy python3-matplotlib
  python3-setuptools python3-wheel python3-venv python3-pip
)

if [ "${SPINFLIP_SKIP_APT:-0}" != 1 ]; then
  missing=()
  for p in "${packages[@]}"; do
    dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" || missing+=("$p")
  done
  if [ ${#missing[@]} -gt 0 ]; then
    sudo=""
    [ "$(id -u)" -ne 0 ] && sudo="sudo"
    echo "spinflip install: installing ${#missing[@]} Debian packages: ${missing[*]}"
    export DEBIAN_FRONTEND=noninteractive
    $sudo apt-get update -q
    $sudo apt-get install -y -q --no-install-recommends "${missing[@]}"
  else
    echo "spinflip install: all Debian packages present"
  fi
fi

jobs=$(nproc 2>/dev/null || echo 2)
cmake -S "$here" -B "$build_dir" -DCMAKE_BUILD_TYPE="$build_type"
cmake --build "$build_dir" -j "$jobs"
echo "spinflip install: built $build_dir/src/cli/spinflip"
