// Fit the greenhouse demo scenario with Node 20's built-in fetch (no packages).
//
//   BASE_URL=http://127.0.0.1:8000 node client_examples/javascript/example.mjs
//
// Reads the invented greenhouse trial (../data/greenhouse.json, made by scripts/demo_data.py),
// lets the service choose the degree, prints the chosen degree, the sequential
// table and a prediction at EC 3.5 dS/m made from the returned fitted-model document.
// Set API_TOKEN if the service has auth on.

import { readFile } from "node:fs/promises";

const BASE_URL = (process.env.BASE_URL ?? "http://127.0.0.1:8000").replace(/\/+$/, "");
const NEW_EC = 3.5;

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

main().catch((error) => {
  console.error(error.message);
  process.exit(1);
});
