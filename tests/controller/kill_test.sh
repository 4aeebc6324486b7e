#!/usr/bin/env bash
# Crash safety: `veq demo` killed with SIGKILL at seeded random moments, many
# times over one database file (so every start must cope with the earlier
# interruptions, and the file grows as a lab's would). After each kill:
#  - SQLite's integrity check is "ok";
#  - every point veq acknowledged ("point <run> <index>", printed only after
#    the store committed it) is in the points table;
#  - a run cut off mid-way is still "running" (1) on disk, and the next start
#    marks it interrupted (5) with a stop owed to its burette and, before
#    anything else, tells the burette to stop ("burette 1 told to stop after
#    an interrupted run"), which settles the stop owed;
#  - a start killed after marking the run but before the stop leaves the stop
#    owed on disk, and the start after it sends it first.
# Usage: kill_test.sh <veq> <scratch folder> [rounds] [seed]
set -euo pipefail
veq="$1"
dir="$2"
rounds="${3:-50}"
RANDOM="${4:-13013}"  # seeded: the same kill moments every time
rm -rf "$dir" && mkdir -p "$dir"
db="$dir/kill.sqlite"
failures=0
kills_in_run=0
kills_between=0
points_checked=0
stops_seen=0
owed_carried=0
ended_first=0
kills_before_open=0
pending_run=""  # a run killed mid-way, not yet seen marked interrupted
started=$(date +%s.%N)

fail() {
  echo "FAIL round $round: $*"
  failures=$((failures + 1))
}
sql() { sqlite3 -batch -noheader "$db" "$1"; }

# The series' wall time on this machine now (about 1 s idle, several under
# load): the kills are spread from 20 ms to its end.
t0=$(date +%s%N)
"$veq" demo --db "$dir/timing.sqlite" >/dev/null || true
span_ms=$((($(date +%s%N) - t0) / 1000000))
echo "one whole veq demo: $span_ms ms; kills from 20 ms to $span_ms ms after the start"

for round in $(seq 1 "$rounds"); do
  delay_ms=$((20 + (RANDOM * 32768 + RANDOM) % (span_ms - 19)))
  out="$dir/round-$round.out"
  # A start killed between marking the run interrupted and telling the
  # burette to stop: the mark is on disk with the stop still owed, and this
  # start must send it first.
  owed_before=0
  if [ -f "$db" ] && [ "$(sql "SELECT count(*) FROM sqlite_master WHERE name = 'runs'")" = "1" ]; then
    owed_before=$(sql "SELECT count(*) FROM runs WHERE stop_owed = 1")
  fi
  if [ -n "$pending_run" ] && [ "$(sql "SELECT status FROM runs WHERE id = $pending_run")" = "5" ]; then
    if [ "$owed_before" != "0" ]; then
      echo "round $round: run $pending_run was marked interrupted by a start killed before its stop; the stop is still owed"
      owed_carried=$((owed_carried + 1))
    else
      # The stop was confirmed (the owed mark is cleared only then), but the
      # start was killed before it printed so.
      echo "round $round: run $pending_run was marked and its burette stopped by a start killed before its first line"
      pending_run=""
    fi
  fi
  "$veq" demo --db "$db" --print-points >"$out" 2>"$dir/round-$round.err" &
  pid=$!
  sleep "$(printf '%d.%03d' $((delay_ms / 1000)) $((delay_ms % 1000)))"
  if kill -KILL "$pid" 2>/dev/null; then killed=1; else killed=0; fi
  wait "$pid" 2>/dev/null || true
  if [ "$killed" -eq 0 ]; then
    echo "round $round: veq ended before the kill at $delay_ms ms"
    ended_first=$((ended_first + 1))
  fi

  # The previous round's cut-off run, or a stop still owed: this start must
  # have stopped the burette first and marked the run interrupted, if it got
  # past opening the store (the header line is printed after both), and no
  # stop is owed any more.
  if [ -n "$pending_run" ] || [ "$owed_before" != "0" ]; then
    if grep -q '^veq demo:' "$out"; then
      first=$(head -n 1 "$out")
      if [ "$first" != "burette 1 told to stop after an interrupted run" ]; then
        fail "after run ${pending_run:-?} was cut off, the first line was '$first'"
      else
        stops_seen=$((stops_seen + 1))
      fi
      if [ -n "$pending_run" ]; then
        status=$(sql "SELECT status FROM runs WHERE id = $pending_run")
        [ "$status" = "5" ] || fail "run $pending_run has status '$status', not interrupted (5)"
      fi
      owed_after=$(sql "SELECT count(*) FROM runs WHERE stop_owed = 1")
      [ "$owed_after" = "0" ] || fail "$owed_after stops still owed after the burettes were stopped"
      pending_run=""
    fi
  elif grep -q 'told to stop' "$out"; then
    fail "a stop was sent with no run cut off and none owed"
  fi

  check=$(sql "PRAGMA integrity_check")
  [ "$check" = "ok" ] || fail "integrity check: $check"

  # Every acknowledged point is stored.
  acked="$dir/acked.csv"
  grep '^point ' "$out" | awk '{print $2 "," $3}' >"$acked" || true
  n=$(wc -l <"$acked")
  if [ "$n" -gt 0 ]; then
    missing=$(sqlite3 -batch -noheader "$db" <<SQL
CREATE TEMP TABLE acked (run_id INTEGER, idx INTEGER);
.mode csv
.import $acked acked
SELECT count(*) FROM acked a WHERE NOT EXISTS
  (SELECT 1 FROM points p WHERE p.run_id = a.run_id AND p.idx = a.idx);
SQL
)
    [ "$missing" = "0" ] || fail "$missing of $n acknowledged points are missing"
    points_checked=$((points_checked + n))
  fi

  # Mid-run or between runs: a run left "running" on disk.
  running=$(sql "SELECT group_concat(id) FROM runs WHERE status = 1")
  if [ -n "$running" ]; then
    case "$running" in *,*) fail "more than one run left running: $running" ;; esac
    last_acked=$(tail -n 1 "$acked" | cut -d, -f1)
    if [ -n "$last_acked" ] && [ "$last_acked" -gt "$running" ]; then
      fail "run $running left running but points of a later run $last_acked were acknowledged"
    fi
    if [ "$running" = "$pending_run" ]; then
      # Killed before this start had opened the store: the earlier run is
      # still the one left running.
      kills_before_open=$((kills_before_open + 1))
    else
      [ -z "$pending_run" ] || fail "run $pending_run still pending while run $running is running"
      kills_in_run=$((kills_in_run + 1))
    fi
    pending_run="$running"
  else
    kills_between=$((kills_between + 1))
  fi
done

# The last start: opening the store marks the last cut-off run interrupted.
"$veq" runs --db "$db" >/dev/null
if [ -n "$pending_run" ]; then
  status=$(sql "SELECT status FROM runs WHERE id = $pending_run")
  [ "$status" = "5" ] || { round=final; fail "run $pending_run has status '$status' after the last open"; }
fi
left=$(sql "SELECT count(*) FROM runs WHERE status = 1")
[ "$left" = "0" ] || { round=final; fail "$left runs still running after the last open"; }
[ "$(sql 'PRAGMA integrity_check')" = "ok" ] || { round=final; fail "final integrity check"; }

ended=$(date +%s.%N)
runs_total=$(sql "SELECT count(*) FROM runs")
points_total=$(sql "SELECT count(*) FROM points")
interrupted_total=$(sql "SELECT count(*) FROM runs WHERE status = 5")
printf 'rounds: %d, veq ended before its kill in %d; kills during a run: %d, between runs: %d\n' \
  "$rounds" "$ended_first" "$kills_in_run" "$((kills_between - ended_first))"
printf 'kills before the store was opened, an earlier run still left running: %d\n' "$kills_before_open"
printf 'burette stops seen first at the next start: %d\n' "$stops_seen"
printf 'starts that found a stop owed by an earlier start killed before sending it: %d\n' "$owed_carried"
printf 'acknowledged points checked: %d; database: %d runs (%d interrupted), %d points\n' \
  "$points_checked" "$runs_total" "$interrupted_total" "$points_total"
printf 'failures: %d; duration %.1f s\n' "$failures" "$(echo "$ended - $started" | bc)"
[ "$failures" -eq 0 ]
