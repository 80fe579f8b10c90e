#!/usr/bin/env bash
# cli_faults.sh: output faults. A full stdout, an output path that is a device, a
# FIFO, a folder or a symbolic link, an unwritable folder, a disk that fills up in
# the middle of a file (the file-size limit of `ulimit -f`, which fails a write as
# a full disk does), and SIGINT/SIGTERM in the middle of `run --out`: each gives
# the exit status of the README (3 file I/O, 128 + the signal) and a message, and
# never leaves a file under its final name that is not complete, nor a temporary
# file (NAME.tmp.PID-I) behind.
# Usage: cli_faults.sh RINGUP_BINARY SOURCE_DIR
set -u
ru=$1
src=$2
. "$(dirname "$0")/clitest.sh"
colp=$src/examples/follower-colpitts.yaml

status_msg() { # status_msg NAME STATUS PATTERN COMMAND...: status and stderr
    local name=$1 want=$2 pat=$3
    shift 3
    timeout 120 "$@" >"$tmp/out" 2>"$tmp/err"
    check "$name: status" "$want" $?
    grepcheck "$name: message" "$pat" "$tmp/err"
}

no_leftovers() { # no_leftovers NAME DIR: no temporary file anywhere under DIR
    local left
    left=$(find "$2" -name '*.tmp.*' 2>/dev/null | head -n 3)
    check "$1: no temporary files" "" "$left"
}

absent() { # absent NAME PATH
    check "$1: $(basename "$2") not written" no "$([ -e "$2" ] && echo yes || echo no)"
}

# 1. A full stdout is a failed write (exit 3), never 0.
for cmd in "check $vdp" "check $vdp --json" "poles $vdp" "models" "run $vdp --stop 2m" \
           "run $vdp --stop 2m --json" "--help"; do
    # shellcheck disable=SC2086
    timeout 120 "$ru" $cmd >/dev/full 2>"$tmp/err"
    check "$cmd >/dev/full: status" 3 $?
    grepcheck "$cmd >/dev/full: message" "cannot write the output: No space left on device" \
        "$tmp/err"
done

# 2. Output paths that are not regular files are refused before the run (exit 3)
# and left as they were; a symbolic link is neither replaced nor written through.
mkdir -p "$tmp/paths/o"
echo keep >"$tmp/paths/target"
ln -s "$tmp/paths/target" "$tmp/paths/link.wav"
ln -s "$tmp/paths/target" "$tmp/paths/o/wave.csv"
ln -s /dev/null "$tmp/paths/null.pdf"
mkfifo "$tmp/paths/fifo.wav"
mkdir "$tmp/paths/folder.wav"
status_msg "--wav /dev/null" 3 "cannot write '/dev/null': it is a character device" \
    "$ru" run "$vdp" --wav /dev/null
check "--wav /dev/null: refused before the run" 0 "$(wc -c <"$tmp/out")"
check "/dev/null is still a device" yes "$([ -c /dev/null ] && echo yes || echo no)"
status_msg "--wav /dev/full" 3 "'/dev/full': it is a character device" \
    "$ru" run "$vdp" --wav /dev/full
status_msg "--wav a symbolic link" 3 "link.wav': it is a symbolic link; ringup writes only new or regular files" \
    "$ru" run "$vdp" --wav "$tmp/paths/link.wav"
check "--wav a symbolic link: still a link" yes "$([ -L "$tmp/paths/link.wav" ] && echo yes || echo no)"
status_msg "--wav a FIFO" 3 "fifo.wav': it is a pipe \(FIFO\)" "$ru" run "$vdp" --wav "$tmp/paths/fifo.wav"
status_msg "--wav a folder" 3 "folder.wav': it is a folder" "$ru" run "$vdp" --wav "$tmp/paths/folder.wav"
status_msg "--report a link to /dev/null" 3 "null.pdf': it is a symbolic link" \
    "$ru" run "$vdp" --report "$tmp/paths/null.pdf"
status_msg "--out with wave.csv a link" 3 "wave.csv': it is a symbolic link" \
    "$ru" run "$vdp" --out "$tmp/paths/o"
check "the links' target is untouched" keep "$(cat "$tmp/paths/target")"
status_msg "--out a file" 3 "cannot create output folder: Not a directory" \
    "$ru" run "$vdp" --out "$tmp/paths/target"
status_msg "--plots a file" 3 "cannot create output folder: Not a directory" \
    "$ru" run "$vdp" --plots "$tmp/paths/target"
no_leftovers "non-regular paths" "$tmp/paths"

# 3. An unwritable folder: refused before the run (exit 3). Root may write
# anywhere, so as root the commands run as the unprivileged user nobody.
mkdir -p "$tmp/ro"
chmod 755 "$tmp"
chmod 555 "$tmp/ro"
as_user=()
if [ "$(id -u)" = 0 ]; then
    if command -v setpriv >/dev/null; then
        as_user=(setpriv --reuid=65534 --regid=65534 --clear-groups)
    else
        as_user=(SKIP)
    fi
fi
if [ "${as_user[0]:-}" = SKIP ]; then
    echo "skipped: unwritable folder (running as root without setpriv)"
else
    for opt in "--wav $tmp/ro/x.wav" "--out $tmp/ro" "--report $tmp/ro/r.pdf" \
               "--plots $tmp/ro/figs"; do
        # shellcheck disable=SC2086
        status_msg "read-only folder, run $opt" 3 "Permission denied" \
            "${as_user[@]}" "$ru" run "$vdp" $opt
        check "read-only folder, run $opt: before the run" 0 "$(wc -c <"$tmp/out")"
    done
    check "read-only folder stays empty" "" "$(ls -A "$tmp/ro")"
fi
chmod 700 "$tmp"

# 4. The disk fills up in the middle of a file: exit 3, no file under the final
# name, no temporary file. `ulimit -f 16` caps every file at 16 KiB (a figure is
# 40-160 KiB, a report more, wave.csv megabytes); SIGXFSZ is ignored so that the
# write fails with EFBIG, as a full disk fails it with ENOSPC.
full() { # full NAME BLOCKS STATUS PATTERN COMMAND...
    local name=$1 blocks=$2 want=$3 pat=$4
    shift 4
    (trap '' XFSZ; ulimit -f "$blocks"; exec timeout 120 "$@") >"$tmp/out" 2>"$tmp/err"
    check "$name: status" "$want" $?
    [ "$pat" = - ] || grepcheck "$name: message" "$pat" "$tmp/err"
}
mkdir -p "$tmp/full"
cd "$tmp/full" || exit 1
full "--plots, disk full" 16 3 "wave.png': the file came out incomplete" \
    "$ru" run "$vdp" --plots figs
absent "--plots, disk full" figs/wave.png
full "--plots svg, disk full" 16 3 "wave.svg': the file came out incomplete" \
    "$ru" run "$vdp" --plots figs --plot-format svg
absent "--plots svg, disk full" figs/wave.svg
full "--report pdf, disk full" 16 3 "r.pdf': the file came out incomplete" \
    "$ru" run "$vdp" --report r.pdf
absent "--report pdf, disk full" r.pdf
full "--report html, disk full" 16 3 "cannot write 'r.html'" "$ru" run "$vdp" --report r.html
absent "--report html, disk full" r.html
full "run --out, disk full" 16 3 "cannot write 'o/wave.csv': File too large" \
    "$ru" run "$vdp" --out o
absent "run --out, disk full" o/wave.csv
full "run --engine envelope --out, disk full" 16 3 "wave.csv': File too large" \
    "$ru" run "$vdp" --engine envelope --out e
absent "envelope --out, disk full" e/wave.csv
full "run --wav, disk full" 1 3 "cannot write WAV file x.wav" "$ru" run "$vdp" --wav x.wav
absent "run --wav, disk full" x.wav
full "steady --out, disk full" 4 3 "steady.csv': File too large" "$ru" steady "$vdp" --out s
absent "steady --out, disk full" s/steady.csv
full "response --plots, disk full" 16 3 "response.png': the file came out incomplete" \
    "$ru" response "$colp" --from drv --to top --plots r
absent "response --plots, disk full" r/response.png
full "compare --out, disk full" 16 2 - "$ru" compare "$colp" --part A1 \
    --models soft-follower --out c
grepcheck "compare --out, disk full: the row says why" "wave.csv': File too large" "$tmp/out"
absent "compare --out, disk full" c/soft-follower/wave.csv
no_leftovers "disk full" "$tmp/full"
cd "$src" || exit 1

# 5. SIGINT or SIGTERM in the middle of `run --out` (and of compare --out): the
# run stops at its next sample, the unfinished wave.csv goes, exit 128 + signal.
interrupt() { # interrupt NAME SIGNAL STATUS DIR COMMAND...
    local name=$1 sig=$2 want=$3 dir=$4
    shift 4
    "$@" >"$tmp/out" 2>"$tmp/err" &
    local pid=$! i
    for i in $(seq 1 200); do # until the temporary file is there (at most 20 s)
        [ -n "$(find "$dir" -name 'wave.csv.tmp.*' 2>/dev/null)" ] && break
        sleep 0.1
    done
    kill -s "$sig" "$pid"
    wait "$pid"
    check "$name: status" "$want" $?
    grepcheck "$name: message" "stopped by SIG$sig.*no unfinished file was kept" "$tmp/err"
    check "$name: no wave.csv" "" "$(find "$dir" -name 'wave.csv' 2>/dev/null)"
    no_leftovers "$name" "$dir"
}
# 40 s of a 5 kHz tank: 200 000 periods, far longer than the test waits.
interrupt "run --out, SIGINT" INT 130 "$tmp/sig1" "$ru" run "$vdp" --stop 40 --out "$tmp/sig1"
interrupt "run --out, SIGTERM" TERM 143 "$tmp/sig2" "$ru" run "$vdp" --stop 40 --out "$tmp/sig2"
interrupt "run --out --wav, SIGINT" INT 130 "$tmp/sig3" "$ru" run "$vdp" --stop 40 \
    --out "$tmp/sig3" --wav "$tmp/sig3.wav" --wav-seconds 10
absent "run --wav, SIGINT" "$tmp/sig3.wav"
no_leftovers "run --wav, SIGINT" "$tmp"
interrupt "compare --out, SIGTERM" TERM 143 "$tmp/sig4" "$ru" compare "$colp" --part A1 \
    --models soft-follower,emitter-follower --stop 4 --out "$tmp/sig4"

finish
