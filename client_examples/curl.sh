#!/usr/bin/env bash
# Fit the greenhouse demo scenario with curl (and jq to read the JSON answers).
#
#   BASE_URL=http://127.0.0.1:8000 client_examples/curl.sh
#
# Sends the invented greenhouse trial (data/greenhouse.json, made by scripts/demo_data.py) to
# /v1/fit, lets the service choose the degree, prints the chosen degree and the sequential
# table, then sends the returned fitted-model document to /v1/predict for EC 3.5 dS/m.
# Set API_TOKEN if the service has auth on.
#
#   BASE_URL=http://127.0.0.1:8000 client_examples/curl.sh dose-response
#
# fits a four-parameter logistic to the standards of an invented ELISA plate (data/plate.json),
# keeps the fitted-model document and reads unknown samples' readings (each the mean of 2
# wells) back to concentrations with intervals, statuses and the curve's working range.
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

# The ELISA plate: fit the 4PL, store the document, read the unknowns back through it.
dose_response() {
  local plate fit document result level
  plate="$(dirname "$DATA")/plate.json"
  fit=$(call /v1/fit < "$plate")
  document=$(jq -c '.fitted_model' <<<"$fit")   # store this JSON; read samples through it later
  result=$(jq -c --argjson doc "$document" \
             '{fitted_model: $doc, y: [0.2, 0.6, 1.4, 2.3, 3.2], replicates: 2}' <<<'{}' \
           | call /v1/invert)
  level=$(jq -r '.level * 100 | round' "$plate")
  echo "ELISA plate (invented demo data): $(jq -r '.n' <<<"$fit") standards, $(jq -r '.model.family' <<<"$fit")"
  jq -r '.coefficients[] | select(.term == "ec50") | [.estimate, .lower, .upper] | @tsv' <<<"$fit" \
    | while IFS=$'\t' read -r estimate lower upper; do
        printf 'ec50 %.6g, %s%% interval %.6g to %.6g\n' "$estimate" "$level" "$lower" "$upper"
      done
  jq -r '.working_range | [.cv_limit * 100, .replicates, .lower, .upper] | @tsv' <<<"$result" \
    | while IFS=$'\t' read -r cv m lower upper; do
        printf 'working range (CV <= %g%%, %s replicates): %.6g to %.6g\n' "$cv" "$m" "$lower" "$upper"
      done
  jq -r '.estimates[] | [.y, .x, .lower, .upper, .status]
         | map(if . == null then "-" else . end) | @tsv' <<<"$result" \
    | while IFS=$'\t' read -r y x lower upper status; do
        if [ "$x" = "-" ]; then
          printf 'reading %g: no concentration (%s)\n' "$y" "$status"
          continue
        fi
        ends=()
        for v in "$lower" "$upper"; do
          if [ "$v" = "-" ]; then ends+=(unbounded); else ends+=("$(printf '%.6g' "$v")"); fi
        done
        printf 'reading %g: x %.6g, %s%% interval %s to %s (%s)\n' "$y" "$x" "$level" \
          "${ends[0]}" "${ends[1]}" "$status"
      done
  echo "back-calculated values support, never replace, a validated assay procedure"
}

if [ "${1:-}" = "dose-response" ]; then
  dose_response
  exit 0
fi

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
