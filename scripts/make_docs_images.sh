#!/usr/bin/env bash
# Makes the pictures of the worked example (docs/worked-example.md) from the demo's
# synthetic rock core, with the commands the page shows, and writes them into docs/.
#
#   bash scripts/make_docs_images.sh [WORKDIR]
#
# WORKDIR (default: a new temporary folder, removed at the end) holds the stacks; only
# the PNGs go into docs/. The same tripass source gives the same pictures: the phantom
# is seeded and every step is deterministic.
set -euo pipefail
cd "$(dirname "$0")/.."
export PATH="$PATH:/usr/local/go/bin"

work=${1:-}
if [ -z "$work" ]; then
  work=$(mktemp -d)
  trap 'rm -rf "$work"' EXIT
fi
mkdir -p "$work" docs
bin="$work/tripass"
go build -o "$bin" ./cmd/tripass

step() { # print the command as the page shows it, then run it
  echo "\$ tripass $*" | sed "s|$work/||g"
  "$bin" "$@"
}

# The demo writes a 192×192×128 uint16 rock core of 6×6×10 µm voxels (and runs its own
# steps, which this script repeats explicitly below).
"$bin" demo "$work" --quiet >/dev/null
cd "$work"

# 1. Smooth by 9 µm along every axis: 1.5 voxels across x and y, 0.9 along z.
step smooth rock-core.tif rock-smooth.tif --sigma 9um --overwrite --quiet
# 2. The gradient magnitude of the smoothed core, in grey levels per µm.
step gradient rock-smooth.tif rock-gradient.tif --physical --overwrite --quiet
# 3. A tilted point-spread function: 1×1×3 voxels, turned 30° about y; how cheap is it?
step kernel make oriented-gaussian --sigma 1,1,3 --angles 0,30,0 -o tilted-psf.npy --overwrite
step kernel inspect tilted-psf.npy --tolerance 1e-3 --plot kernel-tilted-psf.png --overwrite
step convolve rock-core.tif rock-psf.tif --kernel tilted-psf.npy --tolerance 1e-3 --overwrite --quiet
# 4. Pictures: the core alone, before and after smoothing, the gradient, the blur.
step preview rock-core.tif preview-core.png --overwrite --quiet
step preview rock-core.tif preview-smooth.png --compare rock-smooth.tif --width 224 --overwrite --quiet
step preview rock-smooth.tif preview-gradient.png --compare rock-gradient.tif --own-contrast --width 224 --overwrite --quiet
step preview rock-core.tif preview-psf.png --compare rock-psf.tif --sections xz,xy --width 224 --overwrite --quiet

cd - >/dev/null
for f in kernel-tilted-psf preview-core preview-smooth preview-gradient preview-psf; do
  cp "$work/$f.png" "docs/$f.png"
  size=$(stat -c %s "docs/$f.png")
  echo "docs/$f.png: $size bytes"
  if [ "$size" -ge 204800 ]; then
    echo "docs/$f.png is over 200 KB; lower --width" >&2
    exit 1
  fi
done
