#!/usr/bin/env bash
# The audit commands as a user meets them: users, a sign-off, `veq audit
# verify` on an intact trail, then on a trail edited behind veq's back.
# Usage: cli_audit.sh <veq> <scratch folder>
set -euo pipefail
veq="$1"
dir="$2"
rm -rf "$dir" && mkdir -p "$dir"
db="$dir/lab.sqlite"
# Whether a command's whole output matches a pattern. (Not `cmd | grep -q`:
# grep stops reading at its match, and under pipefail the writer's broken
# pipe would fail the check when the output is long.)
says() {
  local pattern="$1" text
  shift
  text=$("$@")
  grep -q -- "$pattern" <<<"$text"
}
"$veq" demo --db "$db" >/dev/null
printf 'admin-pass-1\n' | "$veq" user add --db "$db" --name admin --role administrator 2>/dev/null
printf 'admin-pass-1\nreviewer-pass\n' |
  "$veq" user add --db "$db" --name rev --role reviewer --by admin 2>/dev/null
printf 'reviewer-pass\n' | "$veq" sign-off --db "$db" --run 1 --user rev 2>/dev/null
says "audit trail intact: 3 records" "$veq" audit verify --db "$db"
# Methods change only by an administrator once the store has users, and the
# change is recorded: no user, a reviewer, and a wrong password are refused.
method="$dir/hardness.method"
sed 's/^replicates = 2/replicates = 3/' "$(dirname "$0")/../docs/examples/tap-water-hardness.method" >"$method"
# (`! cmd` would not stop the script under set -e: test each refusal.)
refused() { if "$@" 2>/dev/null; then echo "not refused: $*"; exit 1; fi; }
refused "$veq" method import "$method" --db "$db"
refused "$veq" method import "$method" --db "$db" --user rev <<<"reviewer-pass"
refused "$veq" method import "$method" --db "$db" --user admin <<<"wrong"
printf 'admin-pass-1\n' | "$veq" method import "$method" --db "$db" --user admin \
  --reason "three replicates" 2>/dev/null | grep -q "recorded in the audit trail"
says "audit trail intact: 4 records" "$veq" audit verify --db "$db"
says "change method" "$veq" audit list --db "$db"
# A reviewer chooses another evaluation of run 1 (a reason is required): the
# run gets that evaluation's results as new records, the endpoint its own.
"$veq" evaluate --db "$db" --run 1 --method gran >/dev/null
evaluation=$("$veq" show --db "$db" --run 1 | sed -n 's/^ *evaluation \([0-9]*\) by gran$/\1/p' | tail -1)
refused "$veq" choose-evaluation --db "$db" --run 1 --evaluation "$evaluation" --user rev \
  --reason "" <<<"reviewer-pass"
chosen=$(printf 'reviewer-pass\n' | "$veq" choose-evaluation --db "$db" --run 1 \
  --evaluation "$evaluation" --user rev --reason "the Gran lines fit both sides" 2>/dev/null)
echo "$chosen" | grep -q "metal_concentration .* mmol/L (evaluation $evaluation)"
gran_ml=$("$veq" show --db "$db" --run 1 | grep -A1 "evaluation $evaluation by gran" | tail -1 | awk '{print $2}')
echo "$chosen" | grep -q "endpoint_volume *$gran_ml mL (evaluation $evaluation)"
says "results in use: those of evaluation $evaluation, chosen by rev" "$veq" show --db "$db" --run 1
says "metal_concentration .*(evaluation $evaluation, in use)" "$veq" show --db "$db" --run 1
# The series' values stay as they were computed, and those resting on run 1
# say that it now uses another evaluation.
says "run 1 now uses evaluation $evaluation (chosen by rev at .*: the Gran lines fit both sides); this value rests on evaluation [0-9]* and is not recomputed" \
  "$veq" series show --db "$db" --series 1
says "\"evaluation_in_use\": $evaluation" "$veq" series show --db "$db" --series 1 --json
says "audit trail intact: 5 records" "$veq" audit verify --db "$db"
# A whole series signed off at once: one audit record per titration it rests on.
refused "$veq" sign-off --db "$db" --series 1 --user rev <<<"wrong password"
signed=$(printf 'reviewer-pass\n' | "$veq" sign-off --db "$db" --series 1 --user rev 2>/dev/null)
count=$(echo "$signed" | sed -n 's/^series 1: \([0-9]*\) runs signed off$/\1/p')
[ "$count" -ge 10 ] && [ "$(echo "$signed" | grep -c "signed off by rev")" -eq "$count" ]
says "audit trail intact: $((5 + count)) records" "$veq" audit verify --db "$db"
# An analyst's edit of the sign-off record, past the database's own refusal.
sqlite3 "$db" "DROP TRIGGER audit_records_are_unchangeable;
               UPDATE audit_records SET new_value = 'rejected' WHERE sequence = 3;"
set +e
out=$("$veq" audit verify --db "$db")
status=$?
set -e
echo "$out"
[ "$status" -eq 3 ] && echo "$out" | grep -q "BROKEN at record 3"
