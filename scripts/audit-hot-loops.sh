#!/bin/sh
# Lists every call instruction inside the generated functions of the bench codecs (every
# function of a codec module that the compiler kept out of line: encode, decode and the
# helpers) in an optimised build, and fails if any of them is a panic (a bounds, overflow
# or unwrap check that the compiler could not remove). x86-64 with binutils' objdump. The
# calls that remain are memcpy/memmove, the encoders' calls of their module's
# `move_to_front`, outside the loops, and a chars codec's calls of its index codec.
#
#     scripts/audit-hot-loops.sh
set -eu
cd "$(dirname "$0")/.."
cargo build --release -q -p precast-example --bin bench-report
objdump -d --no-show-raw-insn -C target/release/bench-report | awk '
    /^[0-9a-f]+ <[a-z_:]+::generated::[a-z0-9_]+::/ { name = $2; f = 1; fns++; next }
    /^[0-9a-f]+ </ { f = 0 }
    f && /call/ {
        calls++
        if ($0 ~ /panic|unwrap|expect|bounds_check|overflow/) { bad++; print name ": " $0 }
        else { i = index($0, "<"); w = substr($0, i + 1); sub(/>$/, "", w); what[w]++ }
    }
    END {
        printf "%d generated functions, %d calls, %d to panics\n", fns, calls, bad + 0
        for (w in what) { k = w; sub(/.*::/, "", k); kinds[k] += what[w] }
        for (k in kinds) printf "  %d x %s\n", kinds[k], k
        exit (bad > 0)
    }'
