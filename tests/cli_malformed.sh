#!/usr/bin/env bash
# cli_malformed.sh: the malformed-input corpus (tests/malformed/, expectations in
# tests/malformed/EXPECT). Each file goes through `ringup check` and `ringup run
# --json`: the exit status, exactly one line on stderr that starts with
# `tests/malformed/FILE:LINE:COL: message`, and nothing on stdout. A crash, a
# sanitizer report or a hang (timeout's status 124) fails the check. The corpus is
# complete both ways: every file has a row and every row has its file.
# Usage: cli_malformed.sh RINGUP_BINARY SOURCE_DIR
set -u
ru=$1
src=$2
. "$(dirname "$0")/clitest.sh"
cd "$src" || exit 1
dir=tests/malformed

expect_refusal() { # expect_refusal CMD FILE STATUS WANT ARGS...
    local cmd=$1 f=$2 status=$3 want=$4
    shift 4
    timeout 20 "$ru" "$cmd" "$@" "$dir/$f" >"$tmp/out" 2>"$tmp/err"
    check "$cmd $f: status" "$status" $?
    check "$cmd $f: lines on stderr" 1 "$(wc -l <"$tmp/err")"
    check "$cmd $f: bytes on stdout" 0 "$(wc -c <"$tmp/out")"
    local got
    got=$(head -n 1 "$tmp/err")
    if [[ "$got" == "$dir/$f:$want"* ]]; then
        passes=$((passes + 1))
    else
        echo "FAIL: $cmd $f: message"
        echo "  want: $dir/$f:$want..."
        echo "  got:  $got"
        fails=$((fails + 1))
    fi
}

rows=0
listed=" "
while IFS=$'\t' read -r f status want; do
    case $f in '#'* | '') continue ;; esac
    rows=$((rows + 1))
    listed="$listed$f "
    if [ ! -f "$dir/$f" ]; then
        echo "FAIL: $f is listed in EXPECT but missing"
        fails=$((fails + 1))
        continue
    fi
    expect_refusal check "$f" "$status" "$want"
    expect_refusal run "$f" "$status" "$want" --json
done <"$dir/EXPECT"

for path in "$dir"/*.yaml; do
    f=${path##*/}
    case $listed in
        *" $f "*) passes=$((passes + 1)) ;;
        *) echo "FAIL: $f has no row in EXPECT"; fails=$((fails + 1)) ;;
    esac
done
# The corpus keeps at least 60 files (bytes, YAML syntax, structure, parts, run
# and measure sections), so that emptying it by mistake cannot pass.
check "corpus size at least 60" yes "$([ "$rows" -ge 60 ] && echo yes || echo no)"
echo "$rows malformed files"
finish
