"""Sections of a nonlinear /v1/fit answer: how the fit started and stopped, derived quantities."""

from __future__ import annotations

from marshmallow import Schema, fields

from schemas.common import integer, number, text
from schemas.fields import StrictBoolean


class FitInfoSchema(Schema):
    """How a nonlinear fit was started, how it converged and why it stopped."""

    started_from = text("given: the start values in model.parameters; automatic: a built-in "
                        "family's own start values.", required=True)
    start = fields.List(fields.Float(), metadata={"description": "The start values used."})
    method = text("The trust-region method of the last solver phase and its scaling.")
    iterations = integer("Jacobian evaluations over every solver phase.")
    function_evaluations = integer("Model evaluations.")
    jacobian_evaluations = integer("Jacobian evaluations.")
    termination = text("Why it stopped: relative_offset, small_gradient or small_step "
                       "(converged); iteration_limit, non_finite_model, singular_jacobian, "
                       "diverged or stalled (not converged).", required=True)
    message = text("The reason in words.")
    converged = StrictBoolean(required=True, metadata={"description": "Converged by the Bates & "
                                                                      "Watts criterion."})
    relative_offset = number("Bates & Watts relative-offset criterion at the end (small: "
                             "converged).")
    gradient_norm = number("Largest cosine between the residuals and a Jacobian column.")
    bound_status = fields.List(fields.String(), metadata={
        "description": "free, lower or upper per parameter (on a bound you set)."})
    jacobian_rank = integer("Rank of the weighted, column-scaled Jacobian at the estimates, "
                            "over the free parameters (those not on a bound).")
    condition_number = number("Its condition number.")
    start_strategy = text("The start the reported fit came from: given, or for automatic "
                          "starts grid_best (best point of the grid search with the linear "
                          "parameters solved exactly), grid_local_2... (other local minima of "
                          "that grid) or shape (read off the data: ends, interpolated "
                          "midpoint, linearized rate); _rewritten when the estimates were "
                          "then written in the family's convention (e.g. slope > 0).")
    starts_tried = integer("Starts solved; the converged fit with the lowest residual sum of "
                           "squares was kept.")


class DerivedSchema(Schema):
    """A quantity computed from one parameter (e.g. a half-life from a rate constant)."""

    name = text("Name of the quantity, e.g. half_life.", required=True)
    meaning = text("What it is, with its formula and unit.", required=True)
    parameter = text("The parameter it is computed from.", required=True)
    estimate = number("Its value at the estimates.", required=True)
    std_error = number("Delta-method standard error.", required=True)
    lower = number("Lower Wald limit (estimate - critical value x std_error).", required=True)
    upper = number("Upper Wald limit.", required=True)
    profile_lower = number("Lower profile-likelihood limit: the parameter's profile limit "
                           "mapped through the (monotone) formula; null when not found.")
    profile_upper = number("Upper profile-likelihood limit, likewise.")
    profile_lower_status = text("found, bound, unbounded or not_computed.")
    profile_upper_status = text("found, bound, unbounded or not_computed.")
