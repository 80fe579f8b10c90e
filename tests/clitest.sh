# clitest.sh: shared by the command-line test scripts (tests/cli_*.sh, which source
# it after setting ru and src): a scratch folder removed on exit, pass/fail counts,
# the checks, and the closing count line. Not a test itself (the CMake glob runs
# only cli_*.sh).
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
fails=0
passes=0
vdp=$src/examples/vdp-tank.yaml

check() { # check NAME WANT GOT (an exit status or any value)
    if [ "$2" = "$3" ]; then
        passes=$((passes + 1))
    else
        echo "FAIL: $1: got $3, want $2"
        fails=$((fails + 1))
    fi
}

grepcheck() { # grepcheck NAME PATTERN FILE
    if grep -Eq -- "$2" "$3"; then
        passes=$((passes + 1))
    else
        echo "FAIL: $1: no match for '$2' in:"
        cat "$3"
        fails=$((fails + 1))
    fi
}

finish() { # the closing count line; the status says whether all passed
    echo "$passes passed, $fails failed"
    [ "$fails" -eq 0 ]
}
