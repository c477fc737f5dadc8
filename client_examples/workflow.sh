#!/usr/bin/env bash
# Workflow step for PLM automation: post a problem file, fail the step on any problem answer,
# and print one selected value (no JSON tool needed: ?select= answers plain text).
#
# Scenario (invented): a release gate for a kiln inspection-door drawing checks that the outer
# face of the door plate stays below its coating limit before the drawing may be released.
#
#   client_examples/workflow.sh problem.json results.points.0.temperature [base-url]
set -euo pipefail
problem_file=${1:?problem JSON file}
select=${2:?dotted path of the value to print}
base=${3:-${CONDUCTION_URL:-http://127.0.0.1:8000}}
kind=${KIND:-plate}

body=$(mktemp)
trap 'rm -f "$body"' EXIT
status=$(curl -sS -o "$body" -w '%{http_code}' --max-time 60 --retry 3 --retry-connrefused \
  -H 'Content-Type: application/json' --data-binary @"$problem_file" \
  "$base/v1/$kind?select=$select")
if [ "$status" != "200" ]; then
  echo "conduction service answered $status:" >&2
  cat "$body" >&2
  echo >&2
  exit 1
fi
cat "$body"
echo
