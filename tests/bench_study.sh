#!/usr/bin/env bash
# bench_study.sh: throughput of batch studies: Monte Carlo units per second on the
# bundled examples with 1 and 2 threads and, when this build has MPI, 1 and 2 MPI
# ranks (one thread each); the speedup is the ratio of wall times in one run of
# this script, the CPU column (user + system of every process) shows what the
# parallel runs cost beside it; the load average is printed before and after,
# since the machine is shared. On a loaded Linux machine with automatic process
# groups (/proc/sys/kernel/sched_autogroup_enabled = 1) a process's share of the
# processors does not grow with its threads, so threads show their speedup only
# on a quiet machine, while separate processes (MPI ranks, shards) take a share
# each. Not a test (not named cli_*.sh; speed is never asserted).
# Usage, from the source folder after a build:
#   tests/bench_study.sh build/ringup [SAMPLES]   (default 24 units per example)
set -u
ru=${1:-build/ringup}
n=${2:-24}
export OMPI_ALLOW_RUN_AS_ROOT=1 OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1
mpi=0 # MPI rows only when this build links MPI and mpirun is there
if command -v mpirun >/dev/null && ldd "$ru" | grep -q libmpi; then
    mpi=1
fi
TIMEFORMAT='%R %U %S'
echo "load average before: $(cut -d' ' -f1-3 /proc/loadavg)   ($(nproc) processors," \
    "autogroup $(cat /proc/sys/kernel/sched_autogroup_enabled 2>/dev/null || echo ?))"
printf '%-24s %-10s %8s %8s %9s %8s %8s\n' example mode wall_s cpu_s units/s speedup cpu_x
for ex in examples/follower-colpitts.yaml examples/rc-ladder-npn.yaml examples/wien-lamp.yaml; do
    base_wall=""
    base_cpu=""
    modes="t1 t2"
    [ $mpi = 1 ] && modes="t1 t2 mpi1 mpi2"
    for m in $modes; do
        case $m in
        t1) cmd=("$ru" montecarlo "$ex" --samples "$n" --threads 1) ;;
        t2) cmd=("$ru" montecarlo "$ex" --samples "$n" --threads 2) ;;
        mpi1) cmd=(mpirun -n 1 "$ru" montecarlo "$ex" --samples "$n" --threads 1) ;;
        mpi2) cmd=(mpirun -n 2 --oversubscribe "$ru" montecarlo "$ex" --samples "$n" \
                   --threads 1) ;;
        esac
        t=$({ time "${cmd[@]}" >/dev/null 2>&1; } 2>&1 | tail -1)
        read -r wall user sys <<<"$t"
        cpu=$(echo "$user + $sys" | bc -l)
        [ -z "$base_wall" ] && base_wall=$wall && base_cpu=$cpu
        printf '%-24s %-10s %8.2f %8.2f %9.2f %8.2f %8.2f\n' "$(basename "$ex")" "$m" \
            "$wall" "$cpu" "$(echo "$n / $wall" | bc -l)" \
            "$(echo "$base_wall / $wall" | bc -l)" "$(echo "$cpu / $base_cpu" | bc -l)"
    done
done
echo "load average after:  $(cut -d' ' -f1-3 /proc/loadavg)"
