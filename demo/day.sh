#!/bin/sh
# A scripted day at the invented orchard cooperative's sorting line (see demo/README.md):
# labelq's commands end to end on the demo files, answering for the grader from the hidden grades.
#
# Usage: sh demo/day.sh [FOLDER]    (default: a new temporary folder)
# Needs `labelq` on PATH and a Python that imports labelq ($PYTHON, default python3).
# Stops with a non-zero exit status at the first step that fails.
set -eu

PYTHON=${PYTHON:-python3}
LABELS=12
folder=${1:-$(mktemp -d "${TMPDIR:-/tmp}/orchard-day.XXXXXX")}

command -v labelq >/dev/null 2>&1 || {
    echo "day.sh: labelq is not on PATH (activate the environment it is installed in)" >&2
    exit 127
}
mkdir -p "$folder"
cd "$folder"
if [ -e orchard.db ]; then
    echo "day.sh: $folder/orchard.db already exists; give an empty folder" >&2
    exit 2
fi
echo "== the day runs in $folder"

step() {
    echo
    echo "== $*"
}

step "write the invented sorting-line readings and their hidden grades"
"$PYTHON" -c 'import sys; from labelq.demo.orchard import write_demo_files; write_demo_files(sys.argv[1])' .
head -n 3 orchard.csv

step "create the store and import the apples"
labelq init --classes export,local,juice --db orchard.db
labelq import orchard.csv --id key --db orchard.db

step "the queue"
labelq next -n 5 --by grader --db orchard.db

# The head of the queue's key, read from `labelq next -n 1 --json` in head.json.
head_key() {
    labelq next -n 1 --json --by grader --db orchard.db >head.json || exit 1
    "$PYTHON" -c 'import json, sys; print(json.load(open(sys.argv[1]))["queue"][0]["key"])' head.json
}

# Three sorting days of four labels each: the store's clock (LABELQ_NOW, for demos and tests) is
# set to the morning of each day, a minute per label, so that `history` has days to show.
step "label the head of the queue $LABELS times over three days, answering from orchard_truth.csv"
i=1
while [ "$i" -le "$LABELS" ]; do
    day=$(( (i - 1) / 4 + 21 ))
    minute=$(( (i - 1) % 4 ))
    export LABELQ_NOW="2026-09-${day}T07:0${minute}:00Z"
    key=$(head_key)
    grade=$(awk -F, -v key="$key" '{ sub(/\r$/, "") } NR > 1 && $1 == key { print $2; exit }' \
        orchard_truth.csv)
    if [ -z "$grade" ]; then
        echo "day.sh: no hidden grade for $key in orchard_truth.csv" >&2
        exit 1
    fi
    echo "-- label $i of $LABELS: $key is $grade"
    labelq label "$key" "$grade" --by grader --note "day.sh" -n 3 --db orchard.db
    i=$((i + 1))
done

unset LABELQ_NOW

step "skip the head of the queue, then undo the skip"
key=$(head_key)
labelq skip "$key" --by grader --db orchard.db
labelq undo --by grader --db orchard.db
rm -f head.json

step "status"
labelq status --db orchard.db

step "history: one row per sorting day (in UTC here)"
labelq history --tz UTC --db orchard.db

step "export the predictions for every apple"
labelq export predictions -o graded.csv --db orchard.db

step "replay a $LABELS-label budget against the hidden grades"
labelq simulate orchard.csv --id key --truth-file orchard_truth.csv --truth grade \
    --budget "$LABELS" --seeds 1 --json >replay.json

step "done: $folder/graded.csv and $folder/replay.json"
