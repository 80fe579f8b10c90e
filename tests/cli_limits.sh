#!/usr/bin/env bash
# cli_limits.sh: the limits of README "Limits" and the refusal of absurd option
# values, each with its exit status (1, bad input) and the figure in the message;
# inputs that are not regular files are refused at once (a `timeout` would turn a
# hang into status 124).
# Usage: cli_limits.sh RINGUP_BINARY SOURCE_DIR
set -u
ru=$1
src=$2
. "$(dirname "$0")/clitest.sh"

refused() { # refused NAME PATTERN COMMAND...: exit 1 and PATTERN on stderr
    local name=$1 pat=$2
    shift 2
    timeout 60 "$@" >"$tmp/out" 2>"$tmp/err"
    check "$name: status" 1 $?
    grepcheck "$name: message" "$pat" "$tmp/err"
}

# Whole-number options are parsed as whole numbers, in range.
refused "compare --threads 1e30" "option --threads: '1e30' is not a whole number from 1 to 1024" \
    "$ru" compare "$vdp" --part X --models a,b --threads 1e30
refused "sweep --threads 0" "option --threads: '0' is not a whole number from 1 to 1024" \
    "$ru" sweep "$vdp" --vary G1.coeffs=1:2:2 --threads 0
refused "montecarlo --samples 1e3" "option --samples: '1e3' is not a whole number from 1 to 10000" \
    "$ru" montecarlo "$vdp" --samples 1e3
refused "montecarlo --samples 10001" "'10001' is not a whole number from 1 to 10000" \
    "$ru" montecarlo "$vdp" --samples 10001
refused "montecarlo --seed -1" "option --seed: '-1' is not a whole number" \
    "$ru" montecarlo "$vdp" --seed -1
refused "response --points 2.5" "option --points: '2.5' is not a whole number from 2 to 100000" \
    "$ru" response "$vdp" --from tank --to tank --points 2.5

# Values that would make a run absurd are refused with the figure.
refused "wav pitch 1 fHz" "WAV pitch 1e-15 Hz is outside the audible band \(20 Hz to 20 kHz" \
    "$ru" run "$vdp" --wav "$tmp/x.wav" --wav-pitch 1f
check "no wav after refusal" no "$([ -e "$tmp/x.wav" ] && echo yes || echo no)"
refused "sample 1 ps over 1 ks" "the run would make 1e\+15 output samples \(stop 1000 s at a spacing of 1e-12 s\)" \
    "$ru" run "$vdp" --stop 1k --sample 1p

# The output budget: 200 nodes at 1 us for 49 s is 4.9e7 samples (under the
# sample limit) of 202 columns (time and 201 nodes), 16 bytes a value: about
# 4.9e7 * 202 * 16 = 158 GB of CSV.
{
    echo "parts:"
    echo "  VS: {type: supply, nodes: [n0, gnd], value: 1V}"
    for i in $(seq 0 199); do
        echo "  R$i: {type: resistor, nodes: [n$i, n$((i + 1))], value: 1k}"
        echo "  C$i: {type: capacitor, nodes: [n$((i + 1)), gnd], value: 1u}"
    done
    echo "run: {kick: power-on}"
    echo "measure: {probe: n200}"
} >"$tmp/rc200.yaml"
refused "CSV byte budget" "wave.csv would take about 158 GB \(4.9e\+07 samples of 202 columns\), more than 2 GB" \
    "$ru" run "$tmp/rc200.yaml" --stop 49 --sample 1u --out "$tmp/big"
check "no wave.csv after refusal" no "$([ -e "$tmp/big/wave.csv" ] && echo yes || echo no)"

# Only regular files are read, and at once.
mkfifo "$tmp/pipe.yaml"
refused "a FIFO" "pipe.yaml: a pipe \(FIFO\) is not a circuit file" "$ru" check "$tmp/pipe.yaml"
refused "/dev/zero" "/dev/zero: a character device is not a circuit file" "$ru" check /dev/zero
refused "/dev/urandom" "a character device is not a circuit file" "$ru" run /dev/urandom
refused "a folder" "a directory is not a circuit file" "$ru" check "$src/examples"

finish
