#!/bin/bash
# Run a codebench sweep on a SLURM allocation: one Dask scheduler, one Dask worker
# per task, and the codebench coordinator on the first node.
#
#   sbatch --nodes=4 --ntasks-per-node=32 scripts/cluster/slurm_sweep.sh configs/surface_si1000.toml
#
# The allocation's tasks become single-threaded Dask workers (one batch each at a
# time). The coordinator is the only process that writes results/<name>/; keep that
# folder on a file system with working file locks (local disk or NFS). Stopping the
# job (scancel, or the time limit) sends SIGTERM: finished batches are committed and
# resubmitting the same script resumes the sweep.
#
# The alternative without a script: a [cluster] section with batch_system = "slurm"
# (see configs/cluster_slurm.toml) lets codebench submit worker jobs itself.
#SBATCH --job-name=codebench
#SBATCH --time=04:00:00
#SBATCH --output=codebench-%j.log
#SBATCH --signal=B:TERM@120

set -euo pipefail
SWEEP=${1:?usage: sbatch slurm_sweep.sh SWEEP_FILE [codebench sweep options]}
shift
VENV=${CODEBENCH_VENV:-$PWD/.venv}          # the same environment on every node
source "$VENV/bin/activate"

export DASK_DISTRIBUTED__WORKER__PROFILE__ENABLED=False   # no 10 ms stack sampling of busy workers
SCHEDULER_FILE=$PWD/dask-scheduler-$SLURM_JOB_ID.json
dask scheduler --scheduler-file "$SCHEDULER_FILE" --port 0 --dashboard-address :0 &
SCHEDULER_PID=$!
while [ ! -s "$SCHEDULER_FILE" ]; do sleep 1; done
ADDRESS=$(python -c "import json, sys; print(json.load(open(sys.argv[1]))['address'])" "$SCHEDULER_FILE")

# One worker process per task, one thread each; the nanny restarts a worker that dies.
srun --kill-on-bad-exit=0 dask worker --scheduler-file "$SCHEDULER_FILE" --nthreads 1 \
     --memory-limit "${CODEBENCH_WORKER_MEMORY:-3GB}" &
WORKERS_PID=$!

# The coordinator runs in the foreground; SIGTERM from SLURM reaches it through trap.
trap 'kill -TERM $COORDINATOR_PID 2>/dev/null' TERM
codebench sweep "$SWEEP" --scheduler "$ADDRESS" "$@" &
COORDINATOR_PID=$!
status=0
wait $COORDINATOR_PID || status=$?
if [ $status -gt 128 ] && kill -0 $COORDINATOR_PID 2>/dev/null; then
    wait $COORDINATOR_PID || status=$?   # the trap interrupted wait: let the coordinator finish committing
fi

kill $WORKERS_PID $SCHEDULER_PID 2>/dev/null || true
rm -f "$SCHEDULER_FILE"
exit $status
