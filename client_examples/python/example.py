"""Fit the greenhouse demo scenario with the Curvewise Python client.

    pip install ./client            # the client alone: standard library only
    BASE_URL=http://127.0.0.1:8000 python client_examples/python/example.py

Reads the invented greenhouse trial (client_examples/data/greenhouse.json, made by
scripts/demo_data.py), lets the service choose the degree, prints the chosen degree,
the sequential table and a prediction at EC 3.5 dS/m made later from the
stored fitted-model document. Set API_TOKEN if the service has auth on.
"""

from __future__ import annotations

import json
import os
import sys
from pathlib import Path

from curvewise_client import ApiError, Client, CurvewiseError

DATA = Path(__file__).resolve().parent.parent / "data" / "greenhouse.json"
NEW_EC = 3.5


def main() -> int:
    base_url = os.environ.get("BASE_URL", "http://127.0.0.1:8000")
    body = json.loads(DATA.read_text())
    client = Client(base_url, token=os.environ.get("API_TOKEN"), timeout=30, retries=2)
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


if __name__ == "__main__":
    sys.exit(main())
