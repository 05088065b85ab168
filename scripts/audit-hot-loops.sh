#!/bin/sh
# Lists every call instruction inside the generated encode/decode functions of the bench
# codecs in an optimised build, and fails if any of them is a panic (a bounds, overflow or
# unwrap check that the compiler could not remove). x86-64 with binutils' objdump. The calls
# that remain are memcpy/memmove and `copy_within` for the final move of an encoded stream
# to the front of the buffer, outside the loops.
#
#     scripts/audit-hot-loops.sh
set -eu
cd "$(dirname "$0")/.."
cargo build --release -q -p precast-example --bin bench-report
objdump -d --no-show-raw-insn -C target/release/bench-report | awk '
    /^[0-9a-f]+ <.*::generated::[a-z0-9_]+::(encode|decode|decode_prefix)>:/ { name = $2; f = 1; fns++; next }
    /^[0-9a-f]+ </ { f = 0 }
    f && /call/ {
        calls++
        if ($0 ~ /panic|unwrap|expect|bounds_check|overflow/) { bad++; print name ": " $0 }
        else { i = index($0, "<"); w = substr($0, i + 1); sub(/>$/, "", w); what[w]++ }
    }
    END {
        printf "%d generated encode/decode functions, %d calls, %d to panics\n", fns, calls, bad + 0
        for (w in what) printf "  %d x %s\n", what[w], w
        exit (bad > 0)
    }'
