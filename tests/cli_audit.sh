#!/usr/bin/env bash
# The audit commands as a user meets them: users, a sign-off, `veq audit
# verify` on an intact trail, then on a trail edited behind veq's back.
# Usage: cli_audit.sh <veq> <scratch folder>
set -euo pipefail
veq="$1"
dir="$2"
rm -rf "$dir" && mkdir -p "$dir"
db="$dir/lab.sqlite"
"$veq" demo --db "$db" >/dev/null
printf 'admin-pass-1\n' | "$veq" user add --db "$db" --name admin --role administrator 2>/dev/null
printf 'admin-pass-1\nreviewer-pass\n' |
  "$veq" user add --db "$db" --name rev --role reviewer --by admin 2>/dev/null
printf 'reviewer-pass\n' | "$veq" sign-off --db "$db" --run 1 --user rev 2>/dev/null
"$veq" audit verify --db "$db" | grep -q "audit trail intact: 3 records"
# An analyst's edit of the sign-off record, past the database's own refusal.
sqlite3 "$db" "DROP TRIGGER audit_records_are_unchangeable;
               UPDATE audit_records SET new_value = 'rejected' WHERE sequence = 3;"
set +e
out=$("$veq" audit verify --db "$db")
status=$?
set -e
echo "$out"
[ "$status" -eq 3 ] && echo "$out" | grep -q "BROKEN at record 3"
