#!/usr/bin/env bash
# thermorph set-up on Debian 12: installs missing Debian packages, builds, then runs the demo or the tests.
#   bash setup.sh demo    simulate the demo case and draw its figures (results/)
#   bash setup.sh test    run every test (ctest)
#   bash setup.sh build   only install and build
set -euo pipefail
here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
cd "$here"
action="${1:-demo}"

packages=(cmake make g++ pkg-config libeigen3-dev libsundials-dev libsuitesparse-dev libhdf5-dev catch2 libtomlplusplus-dev
          libcli11-dev libfmt-dev libudunits2-dev libopenmpi-dev openmpi-bin python3 python3-numpy python3-h5py
          python3-matplotlib python3-scipy python3-xarray python3-h5netcdf time libceres-dev libboost-dev
          python3-dev pybind11-dev python3-pybind11 libdeflate-dev libexpat1-dev lld)
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
    build/thermorph check cases/large_bill.toml
    build/thermorph run cases/large_bill.toml -o results/large_bill.h5
    "$python" postproc/report.py results/large_bill.h5 --window 2h,4h --above core=42
    "$python" postproc/figures.py results/large_bill.h5 --out results/figures
    build/thermorph sweep cases/large_bill.toml --steady --vary segments.bill.vasomotor.shunt=0,1 \
      --vary "segments.bill.length=6 cm:24 cm:4" --set "circulation.fixed_arterial_temperature=40 degC" \
      --set control.vasomotor.enabled=off --metric segments.bill.heat_flow -o results/bill_sizes.h5 -q
    "$python" postproc/sweep_figure.py results/bill_sizes.h5 --out results/figures \
      --metric segments.bill.heat_flow.convection
    echo "Demo results in results/large_bill.h5 and results/bill_sizes.h5, figures in results/figures/"
    echo "Caution: Model estimates for research only; not veterinary or medical advice. Follow local regulations, animal-welfare rules and licensed veterinary or medical practice."
    ;;
  test)
    ctest --test-dir build --output-on-failure -j"$jobs"
    ;;
  *) echo "usage: bash setup.sh [demo|test|build]" >&2; exit 2 ;;
esac
