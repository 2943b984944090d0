#!/usr/bin/env bash
# The README's run command: a real ogived on an embedded SQLite file, eight `ogive work` workers running
# a simulated flow solver (which sleeps a little and sometimes crashes), progress while they work, the
# campaign's status at the end, its HTML report (var/demo-report.html) and its trials as CSV
# (var/demo-trials.csv), and a clean server stop. Installs what is missing and builds first.
# Tokens as in production: an admin token for the operator, a worker token limited to the campaign for the
# workers (each outcome records its label).
set -euo pipefail
cd "$(dirname "$0")/.."

bash deploy/install-deps.sh
cmake --preset ci > /dev/null
cmake --build --preset ci -j "$(nproc)" --target ogived ogive ogive-demo-solver

bin=build/ci
workdir=$(mktemp -d -t ogive-demo.XXXXXX)
port=$(/usr/bin/python3 -c 'import socket; s = socket.socket(); s.bind(("127.0.0.1", 0)); print(s.getsockname()[1])')
server="127.0.0.1:${port}"
ogive() { "${bin}/client/cli/ogive" --server "${server}" --token-file "${workdir}/admin.token" "$@"; }
worker_ogive() { "${bin}/client/cli/ogive" --server "${server}" --token-file "${workdir}/worker.token" "$@"; }

umask 077  # the token files are for this user only
"${bin}/server/ogived" token create --db "${workdir}/demo.db" --role admin --label demo-operator \
  > "${workdir}/admin.token"
"${bin}/server/ogived" token create --db "${workdir}/demo.db" --role worker --label solver-nodes \
  --campaign solver-farm > "${workdir}/worker.token"
"${bin}/server/ogived" token list --db "${workdir}/demo.db"
"${bin}/server/ogived" --db "${workdir}/demo.db" --listen "${server}" 2> "${workdir}/ogived.log" &
ogived_pid=$!
cleanup() {
  kill "${worker_pids[@]}" 2> /dev/null || true
  if kill -0 "${ogived_pid}" 2> /dev/null; then kill -TERM "${ogived_pid}"; wait "${ogived_pid}" || true; fi
}
worker_pids=()
trap cleanup EXIT
for _ in $(seq 50); do ogive campaign list > /dev/null 2>&1 && break; sleep 0.1; done

echo "== ogived is serving ${workdir}/demo.db on ${server}"
ogive campaign create deploy/demo/solver-farm.txtpb
echo "== 8 workers run the simulated solver (each trial sleeps 0.05-0.4 s; about 4% crash)"
for w in $(seq 8); do
  worker_ogive work solver-farm --worker "node-${w}" -- "${bin}/tests/demo/ogive-demo-solver" \
    > "${workdir}/worker-${w}.out" 2> "${workdir}/worker-${w}.log" &
  worker_pids+=($!)
done

# Progress until the workers stop (the campaign is done when its trial budget is spent).
while true; do
  running=0
  for pid in "${worker_pids[@]}"; do kill -0 "${pid}" 2> /dev/null && running=$((running + 1)); done
  ogive campaign list | tail -n +2
  [ "${running}" -eq 0 ] && break
  sleep 2
done
wait "${worker_pids[@]}" 2> /dev/null || true
worker_pids=()

echo
echo "== status"
ogive campaign show solver-farm
echo
echo "== the five best trials"
ogive campaign trials solver-farm --state reported --csv | /usr/bin/python3 -c '
import csv, sys
rows = [r for r in csv.DictReader(sys.stdin) if r["outcome"] == "score"]
rows.sort(key=lambda r: float(r["score"]))
for r in rows[:5]:
    print("  trial %4s  %7.3f min  relaxation=%.3f tolerance=%.2e mesh_level=%s preconditioner=%s reorder=%s  (by %s)" % (
        r["trial"], float(r["score"]), float(r["relaxation"]), float(r["tolerance"]), r["mesh_level"],
        r["preconditioner"], r["reorder"], r["reported_by"]))
'
echo
echo "== the report"
mkdir -p var
ogive campaign report solver-farm -o var/demo-report.html
ogive campaign export solver-farm --csv -o var/demo-trials.csv
echo "report: $(pwd)/var/demo-report.html (open it in a browser)"
echo "trials: $(pwd)/var/demo-trials.csv"
echo
echo "== stopping ogived (SIGTERM: drain, commit, exit 0)"
kill -TERM "${ogived_pid}"
wait "${ogived_pid}"
echo "ogived exited with status $?; its log is ${workdir}/ogived.log"
echo "Candidates are suggestions: check them against your local safety rules before they drive equipment."
