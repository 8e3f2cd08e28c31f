// Fit the greenhouse demo scenario with Node 20's built-in fetch (no packages).
//
//   BASE_URL=http://127.0.0.1:8000 node client_examples/javascript/example.mjs
//
// Reads the invented greenhouse trial (../data/greenhouse.json, made by scripts/demo_data.py),
// lets the service choose the degree, prints the chosen degree, the sequential
// table and a prediction at EC 3.5 dS/m made from the returned fitted-model document.
// Set API_TOKEN if the service has auth on.
//
//   BASE_URL=http://127.0.0.1:8000 node client_examples/javascript/example.mjs dose-response
//
// fits a four-parameter logistic to the standards of an invented ELISA plate
// (../data/plate.json), keeps the fitted-model document and reads unknown samples' readings
// (each the mean of 2 wells) back to concentrations with intervals, statuses and the
// curve's working range.

import { readFile } from "node:fs/promises";

const BASE_URL = (process.env.BASE_URL ?? "http://127.0.0.1:8000").replace(/\/+$/, "");
const NEW_EC = 3.5;
const UNKNOWNS = [0.2, 0.6, 1.4, 2.3, 3.2]; // optical densities of unknown samples
const REPLICATES = 2; // each reading is the mean of 2 wells

async function post(path, body) {
  const headers = { "Content-Type": "application/json", Accept: "application/json" };
  if (process.env.API_TOKEN) headers.Authorization = `Bearer ${process.env.API_TOKEN}`;
  const response = await fetch(BASE_URL + path, {
    method: "POST",
    headers,
    body: JSON.stringify(body),
    signal: AbortSignal.timeout(30_000),
  });
  const payload = await response.json();
  if (!response.ok) {
    // Every error is RFC 9457 problem details: detail says what to do, errors names fields.
    const fields = Object.entries(payload.errors ?? {})
      .map(([field, messages]) => `\n  ${field}: ${messages.join(" ")}`)
      .join("");
    throw new Error(`error ${response.status}: ${payload.detail}${fields}`);
  }
  return payload;
}

const g = (value, digits = 6) => Number(value.toPrecision(digits)).toString();
const pad = (text, width, left = false) =>
  left ? String(text).padEnd(width) : String(text).padStart(width);

async function main() {
  const dataUrl = new URL("../data/greenhouse.json", import.meta.url);
  const body = JSON.parse(await readFile(dataUrl, "utf8"));
  const fit = await post("/v1/fit", body);
  const { predictions } = await post("/v1/predict", { fitted_model: fit.fitted_model, x: [NEW_EC] });
  const p = predictions[0];

  console.log(`Greenhouse nutrient trial (invented demo data): ${fit.n} benches`);
  console.log(`chosen degree: ${fit.selection.chosen_degree} (${fit.selection.method})`);
  console.log("sequential table:");
  console.log(pad("term", 10, true) + pad("df", 4) + pad("sum_of_squares", 16) + pad("mean_square", 14) +
              pad("F", 12) + pad("p_value", 12));
  for (const row of fit.anova) {
    let line = pad(row.term, 10, true) + pad(row.df, 4) + pad(g(row.sum_of_squares), 16) +
               pad(g(row.mean_square), 14);
    if (row.f !== undefined && row.f !== null) line += pad(g(row.f), 12) + pad(g(row.p_value, 4), 12);
    console.log(line);
  }
  const level = Math.round(100 * body.level);
  console.log(`prediction at x = ${NEW_EC}: fit ${g(p.fit)}, ${level}% new-observation band ` +
              `${g(p.obs_lower)} to ${g(p.obs_upper)}`);
}

async function doseResponse() {
  const body = JSON.parse(await readFile(new URL("../data/plate.json", import.meta.url), "utf8"));
  const fit = await post("/v1/fit", body);
  const document = fit.fitted_model; // a JSON object: store it, read samples through it later
  const result = await post("/v1/invert", { fitted_model: document, y: UNKNOWNS,
                                            replicates: REPLICATES });
  const level = Math.round(100 * body.level);
  const ec50 = fit.coefficients.find((c) => c.term === "ec50");
  const span = result.working_range;
  console.log(`ELISA plate (invented demo data): ${fit.n} standards, ${fit.model.family}`);
  console.log(`ec50 ${g(ec50.estimate)}, ${level}% interval ${g(ec50.lower)} to ${g(ec50.upper)}`);
  console.log(`working range (CV <= ${g(100 * span.cv_limit)}%, ${span.replicates} replicates): ` +
              `${g(span.lower)} to ${g(span.upper)}`);
  for (const e of result.estimates) {
    if (e.x === null || e.x === undefined) {
      console.log(`reading ${g(e.y)}: no concentration (${e.status})`);
      continue;
    }
    const ends = [e.lower, e.upper].map((v) => (v === null || v === undefined ? "unbounded" : g(v)));
    console.log(`reading ${g(e.y)}: x ${g(e.x)}, ${level}% interval ${ends[0]} to ${ends[1]} ` +
                `(${e.status})`);
  }
  console.log("back-calculated values support, never replace, a validated assay procedure");
}

(process.argv[2] === "dose-response" ? doseResponse() : main()).catch((error) => {
  console.error(error.message);
  process.exit(1);
});
