#!/usr/bin/env bash
# Fit the greenhouse demo scenario with curl (and jq to read the JSON answers).
#
#   BASE_URL=http://127.0.0.1:8000 client_examples/curl.sh
#
# Sends the invented greenhouse trial (data/greenhouse.json, made by scripts/demo_data.py) to
# /v1/fit, lets the service choose the degree, prints the chosen degree and the sequential
# table, then sends the returned fitted-model document to /v1/predict for EC 3.5 dS/m.
# Set API_TOKEN if the service has auth on.
set -euo pipefail
export LC_ALL=C
BASE_URL="${BASE_URL:-http://127.0.0.1:8000}"
BASE_URL="${BASE_URL%/}"
DATA="$(cd "$(dirname "$0")" && pwd)/data/greenhouse.json"
NEW_EC=3.5
auth=()
if [ -n "${API_TOKEN:-}" ]; then auth=(-H "Authorization: Bearer ${API_TOKEN}"); fi

# call PATH < body: print the JSON answer; on 4xx/5xx print the problem details and stop.
call() {
  local out status
  out=$(curl --silent --show-error --max-time 30 -X POST "${BASE_URL}$1" \
        -H 'Content-Type: application/json' -H 'Accept: application/json' \
        ${auth[@]+"${auth[@]}"} --data-binary @- --write-out '\n%{http_code}')
  status=${out##*$'\n'}
  out=${out%$'\n'*}
  if [ "$status" -ge 400 ]; then
    echo "error ${status}: $(jq -r '.detail' <<<"$out")" >&2
    jq -r '.errors // {} | to_entries[] | "  \(.key): \(.value | join(" "))"' <<<"$out" >&2
    exit 1
  fi
  printf '%s' "$out"
}

fit=$(call /v1/fit < "$DATA")
prediction=$(jq -c --argjson x "$NEW_EC" '{fitted_model: .fitted_model, x: [$x]}' <<<"$fit" \
             | call /v1/predict)

echo "Greenhouse nutrient trial (invented demo data): $(jq -r '.n' <<<"$fit") benches"
jq -r '"chosen degree: \(.selection.chosen_degree) (\(.selection.method))"' <<<"$fit"
echo "sequential table:"
printf '%-10s%4s%16s%14s%12s%12s\n' term df sum_of_squares mean_square F p_value
jq -r '.anova[] | [.term, .df, .sum_of_squares, .mean_square, (.f // "-"), (.p_value // "-")] | @tsv' \
  <<<"$fit" | while IFS=$'\t' read -r term df ss ms f p; do
    if [ "$f" = "-" ]; then
      printf '%-10s%4d%16.6g%14.6g\n' "$term" "$df" "$ss" "$ms"
    else
      printf '%-10s%4d%16.6g%14.6g%12.6g%12.4g\n' "$term" "$df" "$ss" "$ms" "$f" "$p"
    fi
  done
level=$(jq -r '.level * 100 | round' "$DATA")
jq -r '.predictions[0] | [.fit, .obs_lower, .obs_upper] | @tsv' <<<"$prediction" \
  | while IFS=$'\t' read -r fit_value lower upper; do
      printf 'prediction at x = %s: fit %.6g, %s%% new-observation band %.6g to %.6g\n' \
        "$NEW_EC" "$fit_value" "$level" "$lower" "$upper"
    done
