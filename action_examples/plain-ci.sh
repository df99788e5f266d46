#!/bin/sh
# Any CI system (or a data editor's laptop): install figproof, check, keep the report folder.
# Exit status is figproof's: 0 passed, 1 thresholds crossed, 2 usage or configuration error, 3 a bug in
# figproof, 4 the runner lacks room or a writable temp folder, 130/143 the job was interrupted (see README).
set -eu

python -m pip install figproof

status=0
figproof check \
  --json figproof-report/figproof.json \
  --markdown figproof-report/summary.md \
  --images figproof-report/images \
  --html figproof-report/html || status=$?

# Show the summary in the job log; the folder holds the JSON, the images and html/index.html, the visual
# report (it opens from the folder, no network needed).
if [ -f figproof-report/summary.md ]; then
  cat figproof-report/summary.md
fi
exit "$status"
