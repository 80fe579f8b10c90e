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

# Every number an option takes has a range, and a value outside it is bad input
# with the range in the message (README "Limits").
colp=$src/examples/follower-colpitts.yaml
refused "response --fmin 1e30" "option --fmin: '1e30' is outside 1 mHz to 1 THz" \
    "$ru" response "$colp" --from drv --to top --fmin 1e30
refused "response --fmax 1e300" "option --fmax: '1e300' is outside 1 mHz to 1 THz" \
    "$ru" response "$colp" --from drv --to top --fmax 1e300
refused "margin --fmin 1e-300" "option --fmin: '1e-300' is outside 1 mHz to 1 THz" \
    "$ru" margin "$vdp" --part L1 --fmin 1e-300
refused "jitter --band 1:1e300" "--band must be LO:HI in Hz with 1 mHz <= LO < HI <= 1 THz" \
    "$ru" jitter "$vdp" --band 1:1e300
refused "jitter --temp 1e9" "--temp must be above -273.15 C and at most 1000 C \(got '1e9'\)" \
    "$ru" jitter "$vdp" --temp 1e9
refused "jitter --noise-factor 0.5" "option --noise-factor: '0.5' is outside 1 to 1e\+06" \
    "$ru" jitter "$vdp" --noise-factor 0.5
refused "wav-seconds 1e9" "WAV length 1e\+09 s is outside 0.1 s to 699 s \(the longest file at 48000 Hz\)" \
    "$ru" run "$vdp" --wav "$tmp/x.wav" --wav-seconds 1e9
refused "wav-seconds 1p" "WAV length 1e-12 s is outside 0.1 s" \
    "$ru" run "$vdp" --wav "$tmp/x.wav" --wav-seconds 1p
refused "expect-start-within -1" "option --expect-start-within must be positive" \
    "$ru" run "$vdp" --expect-start-within -1
refused "expect-thd-below 200%" "option --expect-thd-below: '200%' is not above 0 and at most 100%" \
    "$ru" run "$vdp" --expect-thd-below 200%
refused "expect-amplitude -1:2" "'-1:2' is not LO:HI volts with 0 <= LO <= HI" \
    "$ru" run "$vdp" --expect-amplitude -1:2
refused "compare a model twice" "--models names soft-follower twice" \
    "$ru" compare "$colp" --part A1 --models soft-follower,nope,soft-follower
check "no wav after the refusals" no "$([ -e "$tmp/x.wav" ] && echo yes || echo no)"

# A comparison in which no model gives a run is a failure (exit 2), its rows
# still printed; one good model is a result (exit 0).
"$ru" compare "$colp" --part A1 --models nope,../x --stop 1m >"$tmp/out" 2>"$tmp/err"
check "compare, every model failed: status" 2 $?
grepcheck "compare, every model failed: rows" "'../x' is not a preset name" "$tmp/out"
"$ru" compare "$colp" --part A1 --models soft-follower,nope --stop 1m >"$tmp/out" 2>"$tmp/err"
check "compare, one model ran: status" 0 $?

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
