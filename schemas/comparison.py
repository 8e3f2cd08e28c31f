"""The comparison section of a /v1/fit answer: candidate curves side by side, nested F tests."""

from __future__ import annotations

from marshmallow import Schema, fields

from schemas.common import integer, number, text
from schemas.fields import StrictBoolean


class CandidateRowSchema(Schema):
    """One candidate of a comparison (numbers null when it could not be fitted)."""

    label = text("The candidate (family, and degree for polynomials).", required=True)
    family = text("Its family.", required=True)
    n_parameters = integer("Fitted coefficients or parameters (k of the criteria).")
    rss = number("Residual sum of squares.")
    df_residual = integer("Residual degrees of freedom.")
    sigma = number("Residual standard deviation.")
    aic = number("Akaike information criterion.")
    aicc = number("AIC with the small-sample correction.")
    bic = number("Bayesian (Schwarz) information criterion.")
    converged = StrictBoolean(metadata={"description": "It fitted and (nonlinear) converged."})
    flags = fields.List(fields.String(), metadata={
        "description": "Codes of its caution and serious flags."})
    error = text("Why it could not be fitted (null when it was).", allow_none=True)


class NestedTestSchema(Schema):
    """Extra-sum-of-squares F test of a candidate against a richer one containing it."""

    simpler = text("The nested (simpler) candidate.", required=True)
    richer = text("The candidate that contains it.", required=True)
    f = number("F statistic.")
    df_numerator = integer("Extra parameters of the richer candidate.")
    df_denominator = integer("Residual df of the richer candidate.")
    p_value = number("Upper-tail p-value of F.")


class ComparisonSchema(Schema):
    """The comparison of the candidates in model.candidates."""

    select = text("The rule: aicc, aic, bic or f_test.", required=True)
    alpha = number("Level of the F tests.")
    chosen = text("The chosen candidate's label; the rest of the answer reports it.",
                  required=True)
    chosen_index = integer("Its position in model.candidates.", required=True)
    reason = text("Why it was chosen, in plain words.", required=True)
    candidates = fields.List(fields.Nested(CandidateRowSchema), required=True, metadata={
        "description": "Every candidate, in request order."})
    nested_tests = fields.List(fields.Nested(NestedTestSchema), metadata={
        "description": "F tests of every nested pair among the fitted candidates."})
