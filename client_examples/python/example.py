"""Fit the greenhouse demo scenario with the Curvewise Python client.

    pip install ./client            # the client alone: standard library only
    BASE_URL=http://127.0.0.1:8000 python client_examples/python/example.py
    BASE_URL=http://127.0.0.1:8000 python client_examples/python/example.py dose-response

Reads the invented greenhouse trial (client_examples/data/greenhouse.json, made by
scripts/demo_data.py), lets the service choose the degree, prints the chosen degree,
the sequential table and a prediction at EC 3.5 dS/m made later from the
stored fitted-model document. Set API_TOKEN if the service has auth on.

``dose-response``: fits a four-parameter logistic to the standards of an invented ELISA
plate (client_examples/data/plate.json), keeps the fitted-model document, and reads
unknown samples' readings (each the mean of 2 wells) back to concentrations with their
intervals, statuses and the curve's working range.
"""

from __future__ import annotations

import json
import os
import sys
from pathlib import Path

from curvewise_client import ApiError, Client, CurvewiseError

DATA = Path(__file__).resolve().parent.parent / "data" / "greenhouse.json"
PLATE = DATA.parent / "plate.json"
NEW_EC = 3.5
UNKNOWNS = (0.2, 0.6, 1.4, 2.3, 3.2)  # optical densities of unknown samples, mean of 2 wells
REPLICATES = 2


def main() -> int:
    base_url = os.environ.get("BASE_URL", "http://127.0.0.1:8000")
    body = json.loads(DATA.read_text())
    client = Client(base_url, token=os.environ.get("API_TOKEN"), timeout=30, retries=2)
    if sys.argv[1:] == ["dose-response"]:
        return dose_response(client, base_url)
    try:
        fit = client.fit(body["x"], body["y"], model=body["model"], grid=body["grid"],
                         level=body["level"])
        prediction = client.predict(fit.fitted_model, [NEW_EC]).predictions[0]
    except ApiError as error:  # the service said no: show its problem details
        print(f"error {error.status}: {error.problem.detail}", file=sys.stderr)
        for field, messages in error.field_errors.items():
            print(f"  {field}: {' '.join(messages)}", file=sys.stderr)
        return 1
    except CurvewiseError as error:  # no usable answer (connection, timeout, protocol)
        print(f"could not reach {base_url}: {error}", file=sys.stderr)
        return 2

    print(f"Greenhouse nutrient trial (invented demo data): {fit.n} benches")
    print(f"chosen degree: {fit.chosen_degree} ({fit.selection.method})")
    print("sequential table:")
    print(f"{'term':<10}{'df':>4}{'sum_of_squares':>16}{'mean_square':>14}{'F':>12}{'p_value':>12}")
    for row in fit.anova:
        line = f"{row.term:<10}{row.df:>4}{row.sum_of_squares:>16.6g}{row.mean_square:>14.6g}"
        if row.f is not None:
            line += f"{row.f:>12.6g}{row.p_value:>12.4g}"
        print(line)
    level = round(100 * body["level"])
    print(f"prediction at x = {NEW_EC}: fit {prediction.fit:.6g}, {level}% new-observation "
          f"band {prediction.obs_lower:.6g} to {prediction.obs_upper:.6g}")
    return 0


def dose_response(client: Client, base_url: str) -> int:
    """The ELISA plate: fit the 4PL, keep the document, read unknowns back through it."""
    body = json.loads(PLATE.read_text())
    try:
        fit = client.fit(body["x"], body["y"], model=body["model"], include=body["include"],
                         level=body["level"])
        document = fit.fitted_model  # a JSON object: store it, read samples through it later
        result = client.invert(document, UNKNOWNS, replicates=REPLICATES)
    except ApiError as error:
        print(f"error {error.status}: {error.problem.detail}", file=sys.stderr)
        return 1
    except CurvewiseError as error:
        print(f"could not reach {base_url}: {error}", file=sys.stderr)
        return 2
    level = round(100 * body["level"])
    ec50 = next(c for c in fit.coefficients if c.term == "ec50")
    span = result.working_range
    print(f"ELISA plate (invented demo data): {fit.n} standards, {fit.model.family}")
    print(f"ec50 {ec50.estimate:.6g}, {level}% interval {ec50.lower:.6g} to {ec50.upper:.6g}")
    print(f"working range (CV <= {100 * span.cv_limit:g}%, {span.replicates} replicates): "
          f"{span.lower:.6g} to {span.upper:.6g}")
    for e in result.estimates:
        if e.x is None:
            print(f"reading {e.y:g}: no concentration ({e.status})")
            continue
        ends = " to ".join("unbounded" if v is None else f"{v:.6g}" for v in (e.lower, e.upper))
        print(f"reading {e.y:g}: x {e.x:.6g}, {level}% interval {ends} ({e.status})")
    print("back-calculated values support, never replace, a validated assay procedure")
    return 0


if __name__ == "__main__":
    sys.exit(main())
