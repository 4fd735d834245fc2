#!/usr/bin/env bash
# Re-serialise a report JSON document the way three common tools do, to check
# that `iqaudit recheck` compares numbers as numbers (#19):
#   jq .                          (jq 1.6: doubles printed with 17 significant digits)
#   python3 json.load/json.dump   (CPython: repr() of each float, indent 1)
#   node JSON.parse/JSON.stringify (ECMAScript Number::toString: shortest round trip; -0 → 0)
# Usage: reserialise.sh IN.json OUTDIR   → OUTDIR/report.{jq,python,node}.json
set -euo pipefail
in="$1"; out="$2"
jq . "$in" > "$out/report.jq.json"
python3 -c 'import json,sys; json.dump(json.load(open(sys.argv[1])), open(sys.argv[2],"w"), indent=1)' "$in" "$out/report.python.json"
node -e 'const fs=require("fs"); fs.writeFileSync(process.argv[2], JSON.stringify(JSON.parse(fs.readFileSync(process.argv[1],"utf8")), null, 2))' "$in" "$out/report.node.json"
