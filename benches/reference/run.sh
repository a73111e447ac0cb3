#!/usr/bin/env bash
# Times wardsmith (release build) against the SymPy reference computations
# of C_T (no wall, d = 3, 4), C_D (both walls, d = 3…6) and <D D D> (both
# walls, d = 4) in one run, on the same machine, and prints CPU-time medians
# and their ratios.
#
#   bash benches/reference/run.sh            # 3 runs of each
#   RUNS=5 bash benches/reference/run.sh
#   WARDSMITH=path/to/wardsmith bash benches/reference/run.sh
#                                            # another binary, not rebuilt
#   BEFORE=path/to/wardsmith bash benches/reference/run.sh
#                                            # also times a binary built
#                                            # before a change, in the same run
#
# Makes a virtual environment in target/reference-venv with SymPy from the
# package registry on first use. Not part of `cargo test`.
set -euo pipefail

root="$(cd "$(dirname "$0")/../.." && pwd)"
here="$root/benches/reference"
runs="${RUNS:-3}"
venv="$root/target/reference-venv"

if [ ! -x "$venv/bin/python" ]; then
    python3 -m venv "$venv"
    "$venv/bin/pip" install --quiet sympy
fi
py="$venv/bin/python"
if [ -n "${WARDSMITH:-}" ]; then
    ward="$(cd "$(dirname "$WARDSMITH")" && pwd)/$(basename "$WARDSMITH")"
else
    (cd "$root" && cargo build --release --quiet)
    ward="$root/target/release/wardsmith"
fi

# CPU seconds (user + system) of one run of "$@"; its output in $out, its
# exit code in $out.rc.
out="$(mktemp)"
trap 'rm -f "$out" "$out.time" "$out.rc"' EXIT
cpu() {
    local rc=0
    /usr/bin/time -f "%U %S" -o "$out.time" "$@" >"$out" 2>&1 || rc=$?
    echo "$rc" >"$out.rc"
    awk '{ printf "%.3f\n", $1 + $2 }' "$out.time"
}

# Median of the numbers on standard input.
median() {
    sort -g | awk '{ v[NR] = $1 } END { if (NR % 2) print v[(NR + 1) / 2]; else printf "%.4f\n", (v[NR / 2] + v[NR / 2 + 1]) / 2 }'
}

before="${BEFORE:-}"
if [ -n "$before" ]; then
    before="$(cd "$(dirname "$before")" && pwd)/$(basename "$before")"
fi

# A tenth of the CPU seconds of ten checks of a case by the binary "$1".
ten_checks() {
    local t
    # Ten checks in one timed shell: a C_D file takes a few ms, below the
    # 10 ms resolution of /usr/bin/time.
    t="$(cpu sh -c 'for _ in 1 2 3 4 5 6 7 8 9 10; do "$0" check "$1" || exit 1; done' \
        "$1" "$2")"
    awk -v t="$t" 'BEGIN { printf "%.4f", t / 10 }'
}

printf '%-18s %12s %12s %14s %9s %11s' case "wardsmith s" "SymPy s" "SymPy comp. s" ratio "comp. ratio"
[ -n "$before" ] && printf ' %10s %12s' "before s" "before comp."
printf '\n'
total_b=0
total_w=0
total_p=0
total_c=0
for case in ct-d3 ct-d4 cd-dirichlet-d3 cd-dirichlet-d4 cd-dirichlet-d5 cd-dirichlet-d6 \
    cd-neumann-d3 cd-neumann-d4 cd-neumann-d5 cd-neumann-d6 \
    ddd-dirichlet-d4 ddd-neumann-d4; do
    kind="${case%%-*}"
    rest="${case#*-}"
    wall="${rest%-d*}"
    d="${rest##*-d}"
    if [ "$kind" = ct ]; then
        wall=none
        d="${rest#d}"
    fi
    w_times=""
    b_times=""
    p_times=""
    c_times=""
    for _ in $(seq "$runs"); do
        if [ -n "$before" ]; then
            b_times+="$(ten_checks "$before" "$here/cases/$case.ward")"$'\n'
        fi
        w_times+="$(ten_checks "$ward" "$here/cases/$case.ward")"$'\n'
        if [ "$(cat "$out.rc")" != 0 ]; then
            echo "wardsmith failed on $case:" >&2
            cat "$out" >&2
            exit 1
        fi
        if [ "$kind" = cd ] || [ "$kind" = ct ]; then
            p_times+="$(cpu "$py" "$here/wick_reference.py" "$kind" "$wall" "$d")"$'\n'
        else
            p_times+="$(cpu "$py" "$here/wick_reference.py" ddd "$wall")"$'\n'
        fi
        if [ "$(cat "$out.rc")" != 0 ]; then
            echo "the reference disagrees on $case:" >&2
            cat "$out" >&2
            exit 1
        fi
        c_times+="$(awk '/^compute seconds:/ { print $3 }' "$out")"$'\n'
    done
    w="$(printf '%s' "$w_times" | median)"
    p="$(printf '%s' "$p_times" | median)"
    c="$(printf '%s' "$c_times" | median)"
    printf '%-18s %12s %12s %14s %9s %11s' "$case" "$w" "$p" "$c" \
        "$(awk -v a="$p" -v b="$w" 'BEGIN { printf "%.0f", a / (b > 0.0005 ? b : 0.0005) }')" \
        "$(awk -v a="$c" -v b="$w" 'BEGIN { printf "%.0f", a / (b > 0.0005 ? b : 0.0005) }')"
    if [ -n "$before" ]; then
        b="$(printf '%s' "$b_times" | median)"
        printf ' %10s %12s' "$b" \
            "$(awk -v a="$c" -v b="$b" 'BEGIN { printf "%.0f", a / (b > 0.0005 ? b : 0.0005) }')"
        total_b="$(awk -v a="$total_b" -v b="$b" 'BEGIN { print a + b }')"
    fi
    printf '\n'
    total_w="$(awk -v a="$total_w" -v b="$w" 'BEGIN { print a + b }')"
    total_p="$(awk -v a="$total_p" -v b="$p" 'BEGIN { print a + b }')"
    total_c="$(awk -v a="$total_c" -v b="$c" 'BEGIN { print a + b }')"
done
printf '%-18s %12.4f %12.3f %14.3f %9s %11s' total "$total_w" "$total_p" "$total_c" \
    "$(awk -v a="$total_p" -v b="$total_w" 'BEGIN { printf "%.1f", a / b }')" \
    "$(awk -v a="$total_c" -v b="$total_w" 'BEGIN { printf "%.1f", a / b }')"
if [ -n "$before" ]; then
    printf ' %10.4f %12s' "$total_b" "$(awk -v a="$total_c" -v b="$total_b" 'BEGIN { printf "%.1f", a / b }')"
fi
printf '\n'
[ -n "$before" ] && echo "before s: the binary BEFORE, timed the same way; before comp.: SymPy comp. s over it."
echo "CPU seconds (user + system), medians of $runs runs (wardsmith: a tenth of ten checks;"
echo "a ratio is over 0.0005 s when wardsmith took less); SymPy s is the whole process"
echo "(with the import of SymPy), SymPy comp. s the computation after the imports."
