#!/usr/bin/env bash
# cli_margin.sh: the margin command: exit statuses (1 for a missing or unknown part,
# a part that is not two-terminal), JSON on stdout that parses (Debian's
# /usr/bin/python3) with the keys of the README, the figure file.
# Reference: the van der Pol tank (examples/vdp-tank.yaml) settles at 2 V (method
# of averaging: 2 sqrt(a/(3b))), so its inductor carries 2 V / (w L) at
# w = 1/sqrt(LC): 6.32 mA peak.
# Usage: cli_margin.sh RINGUP_BINARY SOURCE_DIR
set -u
ru=$1
src=$2
. "$(dirname "$0")/clitest.sh"
py=/usr/bin/python3

"$ru" margin "$vdp" >"$tmp/out" 2>"$tmp/err"
check "no --part" 1 $?
grepcheck "no --part message" "--part NAME is required" "$tmp/err"
"$ru" margin "$vdp" --part X9 >"$tmp/out" 2>"$tmp/err"
check "unknown part" 1 $?
grepcheck "unknown part message" "no part named 'X9'" "$tmp/err"
"$ru" margin "$src/examples/follower-colpitts.yaml" --part A1 >"$tmp/out" 2>"$tmp/err"
check "amplifier part" 1 $?
grepcheck "amplifier message" "two-terminal" "$tmp/err"
"$ru" margin "$vdp" --part L1 --points 1 >"$tmp/out" 2>"$tmp/err"
check "one point" 1 $?

"$ru" margin "$vdp" --part L1 --amplitude --plots "$tmp/p" >"$tmp/out" 2>"$tmp/err"
check "margin text" 0 $?
grepcheck "operating frequency line" "operating frequency +4\.9" "$tmp/out"
grepcheck "settled current line" "settled current +6\.3" "$tmp/out"
check "figure written" yes "$([ -s "$tmp/p/margin.png" ] && echo yes || echo no)"

"$ru" margin "$vdp" --part L1 --amplitude --json >"$tmp/json" 2>"$tmp/err"
check "margin json" 0 $?
if [ -x "$py" ]; then
    "$py" - "$tmp/json" <<'PY' >"$tmp/pyout" 2>&1
import json, math, sys
d = json.load(open(sys.argv[1]))
for k in ["frequency_hz", "negative_resistance_ohm", "margin", "time_constant_s",
          "startup_time_s", "points", "settled_current_a", "drive_power_w",
          "amplitude_curve"]:
    assert k in d, k
assert all(set(p) == {"f_hz", "re_ohm", "im_ohm"} for p in d["points"])
assert d["margin"] is None  # the inductor has no series resistance
want = 2.0 / math.sqrt(10e-3 / (100e-9 + 1e-12))
assert abs(d["settled_current_a"] / want - 1) < 0.01, d["settled_current_a"]
print("ok")
PY
    check "json keys and settled current" ok "$(tail -1 "$tmp/pyout")"
fi
finish
