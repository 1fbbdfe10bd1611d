#!/usr/bin/env bash
# thermorph set-up on Debian 12: installs missing Debian packages, builds, then runs the demo or the tests.
#   bash setup.sh demo    simulate the demo case and draw its figures (results/)
#   bash setup.sh test    run every test (ctest)
#   bash setup.sh build   only install and build
set -euo pipefail
here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
cd "$here"
action="${1:-demo}"

packages=(cmake make g++ pkg-config libeigen3-dev libsundials-dev libhdf5-dev catch2 libtomlplusplus-dev
          libcli11-dev libfmt-dev libudunits2-dev libopenmpi-dev openmpi-bin python3 python3-numpy python3-h5py
          python3-matplotlib python3-scipy python3-xarray python3-h5netcdf time libceres-dev libboost-dev
          python3-dev pybind11-dev python3-pybind11)
packages+=(python3-pip python3-setuptools python3-wheel)   # pip install ./postproc (ctest figures)
missing=()
for p in "${packages[@]}"; do
  dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" || missing+=("$p")
done
if ((${#missing[@]})); then
  echo "Installing missing Debian packages: ${missing[*]}"
  sudo=""; [[ $(id -u) -ne 0 ]] && sudo="sudo"
  $sudo apt-get update -q
  $sudo env DEBIAN_FRONTEND=noninteractive apt-get install -y -q --no-install-recommends "${missing[@]}"
fi

# Debian's numpy/h5py/matplotlib belong to /usr/bin/python3; a python3 earlier on PATH may lack them.
python=/usr/bin/python3
jobs="$(nproc 2>/dev/null || echo 2)"
cmake -S . -B build -DCMAKE_BUILD_TYPE=Release -DTHERMORPH_PYTHON="$python" >/dev/null
cmake --build build -j"$jobs"

case "$action" in
  build) ;;
  demo)
    mkdir -p results
    build/thermorph check cases/hare_ears.toml
    build/thermorph run cases/hare_ears.toml -o results/hare_ears.h5
    "$python" postproc/report.py results/hare_ears.h5 --window 2h,4h --above core=41
    "$python" postproc/figures.py results/hare_ears.h5 --out results/figures
    echo "Demo results in results/hare_ears.h5, figures in results/figures/ (model estimates for research)"
    ;;
  test)
    ctest --test-dir build --output-on-failure -j"$jobs"
    ;;
  *) echo "usage: bash setup.sh [demo|test|build]" >&2; exit 2 ;;
esac
