"""Invented demo data for the README and examples (never a correctness reference).

Each scenario from the project's demo-scenarios list is generated from a stated
curve, noise level and fixed seed, so anyone can regenerate it::

    python scripts/demo_data.py greenhouse          # a /v1/fit request body
    python scripts/demo_data.py nitrate             # a /v1/fit request body
    python scripts/demo_data.py soil --probes 20    # a /v1/batch request body
    python scripts/demo_data.py enzyme              # a /v1/fit body with the user's equation
    python scripts/demo_data.py assay               # a /v1/fit body comparing 4PL and 5PL
    python scripts/demo_data.py plate               # a /v1/fit body: a 4PL standard curve
    python scripts/demo_data.py greenhouse --degree 2 --include coefficients,statistics

The output is strict JSON on stdout.
"""

from __future__ import annotations

import argparse
import json
import sys

import numpy as np

SEED = 20261201


def greenhouse(seed: int = SEED) -> dict:
    """Tomato yield (kg/m^2) against nutrient conductivity EC (dS/m) on 24 benches.

    Stated curve: yield = 2.0 + 7.2 EC - 1.05 EC^2, noise sd 0.45 kg/m^2,
    EC evenly from 1.0 to 6.0. Yield rises then falls (a quadratic).
    """
    rng = np.random.default_rng(seed)
    ec = np.round(np.linspace(1.0, 6.0, 24), 3)
    yield_kg = 2.0 + 7.2 * ec - 1.05 * ec**2 + rng.normal(0.0, 0.45, ec.size)
    return {
        "x": ec.tolist(),
        "y": np.round(yield_kg, 3).tolist(),
        "model": {"family": "polynomial", "max_degree": 4, "select": "sequential_f",
                  "alpha": 0.05},
        "grid": {"start": 1.0, "stop": 6.0, "step": 0.01},
        "level": 0.95,
    }


def nitrate(seed: int = SEED) -> dict:
    """Absorbance of 6 nitrate standards (mg/L) in triplicate, slight curvature at the top.

    Stated curve: A = 0.004 + 0.0215 c - 0.000085 c^2, noise sd 0.004 absorbance units.
    """
    rng = np.random.default_rng(seed + 1)
    conc = np.repeat([0.0, 2.0, 5.0, 10.0, 20.0, 40.0], 3)
    absorbance = 0.004 + 0.0215 * conc - 0.000085 * conc**2 + rng.normal(0.0, 0.004, conc.size)
    return {
        "x": conc.tolist(),
        "y": np.round(absorbance, 4).tolist(),
        "model": {"family": "polynomial", "max_degree": 2, "select": "sequential_f"},
        "grid": {"count": 100},
        "level": 0.95,
    }


def soil(probes: int = 20, seed: int = SEED) -> dict:
    """Soil-moisture probes, 30-point calibration runs each; a few faulty probes.

    Stated curve per probe: reading = a + b m + c m^2 with a ~ N(2, 0.3),
    b ~ N(0.95, 0.03), c ~ N(0.002, 0.0005), noise sd 0.4 (% volumetric water);
    every 7th probe is flat, every 11th noisy (sd 4), every 13th has one spike.
    """
    rng = np.random.default_rng(seed + 2)
    moisture = np.linspace(5.0, 45.0, 30)
    series = []
    for i in range(probes):
        a, b, c = rng.normal(2.0, 0.3), rng.normal(0.95, 0.03), rng.normal(0.002, 0.0005)
        reading = a + b * moisture + c * moisture**2 + rng.normal(0.0, 0.4, moisture.size)
        if i % 7 == 6:
            reading = np.full(moisture.size, 21.0) + rng.normal(0.0, 0.05, moisture.size)
        elif i % 11 == 10:
            reading = reading + rng.normal(0.0, 4.0, moisture.size)
        elif i % 13 == 12:
            reading[rng.integers(0, moisture.size)] += 15.0
        series.append({"id": f"probe-{i + 1:04d}", "x": np.round(moisture, 2).tolist(),
                       "y": np.round(reading, 3).tolist()})
    return {"series": series, "model": {"family": "polynomial", "max_degree": 3,
                                        "select": "bic"}, "detail": "summary"}


def enzyme(seed: int = SEED) -> dict:
    """Initial rates of an invented enzyme at eight substrate concentrations, in duplicate.

    Stated curve: rate = 12.0 S / (2.5 + S) (umol/min/mg; S in mM, 0.25 to 32 mM in
    doublings), noise sd 0.25. Saturation kinetics written as the caller's own
    equation (the expression family), with rough start values.
    """
    rng = np.random.default_rng(seed)
    s = np.repeat(0.25 * 2.0 ** np.arange(8), 2)
    rate = 12.0 * s / (2.5 + s) + rng.normal(0.0, 0.25, s.size)
    return {
        "x": s.tolist(),
        "y": np.round(rate, 3).tolist(),
        "model": {"family": "expression", "expression": "vmax*x/(km + x)",
                  "parameters": {"vmax": 10, "km": 1}},
        "grid": {"count": 100},
        "level": 0.95,
    }


def assay(seed: int = SEED) -> dict:
    """Optical density of an invented immunoassay's eight standards, in triplicate.

    Stated curve: a five-parameter logistic on log concentration, OD from 0.05 to
    2.4, half-way at 12 ng/mL, slope 1.0, asymmetry 2.5 (a clearly lopsided
    curve); standards 0.1 to 300 ng/mL in about three-fold steps; noise sd 1% of
    the signal plus 0.005. The body compares the 4PL and the 5PL by the F test.
    """
    rng = np.random.default_rng(seed)
    conc = np.repeat(np.round(np.geomspace(0.1, 300.0, 8), 3), 3)
    z = (2 ** (1 / 2.5) - 1) * (conc / 12.0) ** 1.0
    od = 2.4 + (0.05 - 2.4) / (1 + z) ** 2.5
    od = od + rng.normal(0.0, 1.0, conc.size) * (0.01 * od + 0.005)
    return {
        "x": conc.tolist(),
        "y": np.round(od, 4).tolist(),
        "model": {"candidates": [{"family": "logistic4"}, {"family": "logistic5"}],
                  "select": "f_test", "alpha": 0.05},
        "grid": {"count": 100},
        "level": 0.95,
    }


def plate(seed: int = SEED) -> dict:
    """Optical density of the eight standards of an invented ELISA plate, in duplicate.

    Stated curve: a four-parameter logistic on log concentration, OD 0.08 at zero dose
    rising to 2.9, half-way at 15 ng/mL, slope 1.3; standards 0.5 to 200 ng/mL in about
    2.4-fold steps; noise sd 2% of the signal plus 0.01. Unknown samples are read back
    through the stored curve (client_examples/: dose-response examples).
    """
    rng = np.random.default_rng(seed)
    conc = np.repeat(np.round(np.geomspace(0.5, 200.0, 8), 3), 2)
    od = 2.9 + (0.08 - 2.9) / (1 + (conc / 15.0) ** 1.3)
    od = od + rng.normal(0.0, 1.0, conc.size) * (0.02 * od + 0.01)
    return {
        "x": conc.tolist(),
        "y": np.round(od, 4).tolist(),
        "model": {"family": "logistic4"},
        "include": ["coefficients", "statistics", "fitted_model"],
        "level": 0.95,
    }


def main_body(scenario: str, *, probes: int = 20, seed: int = SEED, degree: int | None = None,
              include: str | None = None) -> dict:
    """The body that ``demo_data.py <scenario> [options]`` prints."""
    if scenario == "soil":
        body = soil(probes, seed)
    else:
        body = {"greenhouse": greenhouse, "nitrate": nitrate,
                "enzyme": enzyme, "assay": assay, "plate": plate}[scenario](seed)
    if degree is not None:
        body["model"] = {"family": "polynomial", "degree": degree}
    if include:
        body["include"] = [name.strip() for name in include.split(",") if name.strip()]
    return body


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("scenario", choices=("greenhouse", "nitrate", "soil", "enzyme", "assay",
                                             "plate"))
    parser.add_argument("--probes", type=int, default=20, help="soil: number of probes")
    parser.add_argument("--seed", type=int, default=SEED)
    parser.add_argument("--degree", type=int, help="fix the degree instead of selecting it")
    parser.add_argument("--include", help="comma-separated response sections, e.g. "
                                          "coefficients,statistics")
    args = parser.parse_args(argv)
    body = main_body(args.scenario, probes=args.probes, seed=args.seed, degree=args.degree,
                     include=args.include)
    json.dump(body, sys.stdout, allow_nan=False)
    sys.stdout.write("\n")
    return 0


if __name__ == "__main__":
    sys.exit(main())
