#!/usr/bin/env bash
# The device bench: precast's generated codecs against a hand-written canonical Huffman codec
# on an emulated Cortex-M4 (QEMU mps2-an386, instructions counted with SysTick under
# -icount shift=0). Builds the firmware images at opt-level 3, "s" and "z", runs the measuring
# ones, sizes and audits every image for panic paths, and prints a markdown report (also
# written to example-crate/firmware/target/device-bench/report.md). See DEVELOPERS.md,
# "Benches on the device".
#
#     scripts/device-bench.sh [--out FILE]
#
# Exit status: 0 all round trips passed and no panic path is linked; 1 a round trip or the
# audit failed; 2 the bench could not run. Speed is reported, never judged.
set -euo pipefail
cd "$(dirname "$0")/.."
command -v qemu-system-arm >/dev/null || { echo "device-bench: qemu-system-arm not found (Debian: apt-get install qemu-system-arm)" >&2; exit 2; }
rustup target list --installed 2>/dev/null | grep -qx thumbv7em-none-eabihf || { echo "device-bench: rustup target add thumbv7em-none-eabihf" >&2; exit 2; }
exec cargo run --release --quiet --manifest-path example-crate/firmware/host/Cargo.toml -- "$@"
