#!/usr/bin/env bash
# mpi_study.sh: batch studies spread over two MPI ranks (dynamic hand-out, rank 0
# writes the report) give exactly what one process gives: a Monte Carlo's table
# and JSON, a sweep's table, a corner study's table, and a Monte Carlo streamed to
# --out (the same records, in any order). Reference: one process of the same
# study. Run by ctest only when the build has MPI (CMake option RU_MPI).
# Usage: mpi_study.sh RINGUP_BINARY SOURCE_DIR MPIRUN
set -u
ru=$1
src=$2
mpirun=$3
. "$(dirname "$0")/clitest.sh"
export OMPI_ALLOW_RUN_AS_ROOT=1 OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1 # CI runs as root
export OMPI_MCA_rmaps_base_oversubscribe=1
two() { timeout 300 "$mpirun" -n 2 --oversubscribe "$@"; }
colp=$src/examples/follower-colpitts.yaml
cd "$tmp"
sed 's/value: 10mH}/value: 10mH, tol: 5%}/' "$vdp" >tank.yaml

"$ru" montecarlo "$colp" --samples 6 --accuracy draft >one.txt 2>err
two "$ru" montecarlo "$colp" --samples 6 --accuracy draft >two.txt 2>err
check "montecarlo on 2 ranks" 0 $?
cmp -s one.txt two.txt
check "2 ranks = 1 process (montecarlo table)" 0 $?
"$ru" montecarlo "$colp" --samples 6 --accuracy draft --json >one.json 2>err
two "$ru" montecarlo "$colp" --samples 6 --accuracy draft --json >two.json 2>err
cmp -s one.json two.json
check "2 ranks = 1 process (montecarlo JSON)" 0 $?

"$ru" sweep "$vdp" --vary C1.value=80n:120n:5 --accuracy draft >s1.txt 2>err
two "$ru" sweep "$vdp" --vary C1.value=80n:120n:5 --accuracy draft >s2.txt 2>err
check "sweep on 2 ranks" 0 $?
cmp -s s1.txt s2.txt
check "2 ranks = 1 process (sweep table)" 0 $?

"$ru" corners tank.yaml --accuracy draft >c1.txt 2>err
two "$ru" corners tank.yaml --accuracy draft >c2.txt 2>err
check "corners on 2 ranks" 0 $?
cmp -s c1.txt c2.txt
check "2 ranks = 1 process (corners table)" 0 $?

two "$ru" montecarlo tank.yaml --samples 5 --accuracy draft --out mc >/dev/null 2>err
check "montecarlo --out on 2 ranks" 0 $?
"$ru" montecarlo tank.yaml --samples 5 --accuracy draft --out mc1 >/dev/null 2>err
tail -n +2 mc/units.jsonl | sort >a
tail -n +2 mc1/units.jsonl | sort >b
cmp -s a b
check "2 ranks stream the records 1 process does" 0 $?
finish
