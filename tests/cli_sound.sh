#!/usr/bin/env bash
# cli_sound.sh: what `run --wav` tells and writes for tones in and out of the audio
# band: the settled tone of a biased stage at the level (its power-on step and bias
# settling removed), an automatic pitch for a tone above the band, the notes.
# Files are read back with sox (an independent reader) when it is installed.
# Usage: cli_sound.sh RINGUP_BINARY SOURCE_DIR
set -u
ru=$1
src=$2
. "$(dirname "$0")/clitest.sh"
ladder=$src/examples/rc-ladder-npn.yaml
colp=$src/examples/follower-colpitts.yaml

# A 671 Hz tone on a 9 V bias: in the band; the bias step must not set the level.
"$ru" run "$ladder" --wav "$tmp/l.wav" >"$tmp/out" 2>"$tmp/err"
check "ladder wav" 0 $?
if grep -q "above the audio band" "$tmp/out"; then
    echo "FAIL: a 671 Hz tone is called above the audio band"; cat "$tmp/out"
    fails=$((fails + 1))
else
    passes=$((passes + 1))
fi
if command -v sox >/dev/null; then
    # Reference: sox's own peak reading of the last 40 ms before the 20 ms fade:
    # the settled tone is the file's peak, -12 dBFS = 0.2512 (within 1 dB: the
    # tone is slightly asymmetric, so its one-sided peak is a little below).
    peak=$(sox "$tmp/l.wav" -n trim 0.14 0.04 stat 2>&1 | awk '/Maximum amplitude/ {print $3}')
    ok=$(awk -v p="$peak" 'BEGIN {print (p > 0.2239 && p <= 0.2512) ? 1 : 0}')
    check "settled tone at -12 dBFS (sox peak $peak)" 1 "$ok"
fi

# 53.8 kHz: above the band, so a pitch is chosen and said. A 3 ms run (the
# automatic length stops near 2 ms) so the stretched file holds the tail read below.
"$ru" run "$colp" --stop 3m --wav "$tmp/c.wav" >"$tmp/out" 2>"$tmp/err"
check "colpitts wav" 0 $?
grepcheck "automatic pitch note" "plays at 440.0 Hz \(pitch chosen automatically" "$tmp/out"
if [ -x /usr/bin/python3 ]; then
    "$ru" run "$colp" --wav "$tmp/c2.wav" --json >"$tmp/j" 2>"$tmp/err"
    ok=$(/usr/bin/python3 -c 'import json,sys; w=json.load(open(sys.argv[1]))["wav"]; print(1 if w["pitch_auto"] and abs(w["tone_audio_hz"]-440)<1e-6*440 and abs(w["peak_dbfs"]+12)<0.01 else 0)' "$tmp/j")
    check "json pitch_auto, tone at 440 Hz, -12 dBFS" 1 "$ok"
fi
if command -v sox >/dev/null; then
    # Reference: sox's RMS of the settled tail; a sine at -12 dBFS peak has an
    # RMS of 0.2512/sqrt(2) = 0.178 (the tone is nearly sinusoidal: THD 2 %).
    rms=$(sox "$tmp/c.wav" -n trim 0.25 0.08 stat 2>&1 | awk '/RMS +amplitude/ {print $3}')
    ok=$(awk -v r="$rms" 'BEGIN {print (r > 0.16 && r < 0.19) ? 1 : 0}')
    check "pitched tone audible (sox rms $rms)" 1 "$ok"
fi

# Real time asked for: the tone stays out of the band and the note says so.
"$ru" run "$colp" --wav "$tmp/r.wav" --wav-real-time >"$tmp/out" 2>"$tmp/err"
check "real-time wav" 0 $?
grepcheck "above-band note" "the tone lies above the audio band" "$tmp/out"
"$ru" run "$colp" --wav "$tmp/x.wav" --wav-real-time --wav-pitch 440 >"$tmp/out" 2>"$tmp/err"
check "pitch and real time together refused" 1 $?
grepcheck "pitch/real-time message" "exclude each other" "$tmp/err"

finish
