"""The /v1/fit response: every section and field, documented.

Undefined statistics are ``null`` (never NaN or Infinity). Arrays of numbers
are plain JSON arrays; their elements may be ``null`` where a value is undefined.
"""

from __future__ import annotations

from marshmallow import Schema, fields

from schemas.common import NoticeSchema, TrustFlagSchema, integer, number, text
from schemas.comparison import ComparisonSchema
from schemas.document import FittedModelField
from schemas.fields import NumberArray, StrictBoolean
from schemas.fit_info import DerivedSchema, FitInfoSchema


def _array(description: str) -> NumberArray:
    return NumberArray(min_items=0, nullable_items_doc=True,
                       metadata={"description": description})


def _indices(description: str) -> fields.List:
    return fields.List(fields.Integer(), metadata={"description": description})


class FittedModelSummarySchema(Schema):
    """The model that was fitted."""

    family = text("Model family.", required=True)
    degree = integer("Degree of the fitted polynomial (chosen or fixed). Polynomials only.")
    intercept = StrictBoolean(metadata={"description": "Constant term present. Polynomials "
                                                      "only."})
    terms = fields.List(fields.String(), required=True, metadata={
        "description": "Term names in order: intercept, x, x^2, ... for polynomials; the "
                       "parameter names for nonlinear families."})
    expression = text("The fitted equation in canonical form (nonlinear families; fixed "
                      "parameters of a built-in family appear as their numbers).")
    weighting = text("How the weights were read: relative or known_sd.")
    scale = text("Built-in families: the x scale of the curve, log (dose-response on log x, "
                 "x >= 0; the default grid is then log-spaced) or linear.")
    transform_x = text("Transform applied to x before fitting.")
    transform_y = text("Transform applied to y before fitting.")


class CoefficientSchema(Schema):
    """One coefficient on the raw (transformed, if asked) x scale."""

    term = text("Term name: intercept, x, x^2, ...", required=True)
    estimate = number("Least-squares estimate.", required=True)
    std_error = number("Standard error of the estimate.", required=True)
    t = number("t statistic (estimate / std_error).", required=True)
    p_value = number("Two-sided p-value of t on df_residual degrees of freedom.", required=True)
    lower = number("Lower confidence limit at the requested level.", required=True)
    upper = number("Upper confidence limit at the requested level.", required=True)
    profile_lower = number("Lower profile-likelihood limit (nonlinear families; null when the "
                           "profile never reaches the critical value on that side; your "
                           "lower bound when the limit is that bound).")
    profile_upper = number("Upper profile-likelihood limit (nonlinear families; null when "
                           "unbounded).")
    profile_lower_status = text("found, bound (the profile stays below the critical value up "
                                "to the bound you set, or the estimate is on it: the limit is "
                                "that bound), unbounded (the data do not bound the parameter "
                                "on that side) or not_computed (see warnings).")
    profile_upper_status = text("found, bound, unbounded or not_computed.")


class AnovaRowSchema(Schema):
    """A row of the sequential ANOVA table; the residual row comes last."""

    term = text("Term entering the model (x, x^2, ...), or residual.", required=True)
    df = integer("Degrees of freedom.", required=True)
    sum_of_squares = number("Sequential sum of squares (uncentred without intercept).",
                            required=True)
    mean_square = number("sum_of_squares / df.", required=True)
    f = number("F statistic against the residual mean square (absent on the residual row).")
    p_value = number("p-value of f (absent on the residual row).")


class StatisticsSchema(Schema):
    """Whole-fit statistics."""

    n = integer("Points used in the fit (after any dropping).")
    n_parameters = integer("Number of coefficients.")
    df_model = integer("Model degrees of freedom.")
    df_residual = integer("Residual degrees of freedom.", required=True)
    rss = number("Residual sum of squares (weighted if weights were given).")
    tss = number("Total sum of squares (about the mean with intercept, uncentred without).")
    centred = StrictBoolean(metadata={"description": "False without intercept: tss and "
                                                     "r_squared are uncentred."})
    r_squared = number("Coefficient of determination (uncentred without intercept).",
                       required=True)
    adj_r_squared = number("r_squared adjusted for the number of parameters.", required=True)
    sigma = number("Residual standard deviation.", required=True)
    f = number("Overall F statistic of the model against the null model.")
    f_p_value = number("p-value of f.")
    log_likelihood = number("Gaussian log-likelihood at the estimates.")
    aic = number("Akaike information criterion.", required=True)
    aicc = number("AIC with the small-sample correction.")
    bic = number("Bayesian (Schwarz) information criterion.", required=True)
    press = number("Leave-one-out prediction error sum of squares.")
    press_r_squared = number("1 - press / tss.")
    condition_number = number("Condition number of the scaled design (large: unstable).")


class CandidateSchema(Schema):
    """One candidate degree in the selection trail."""

    degree = integer("Candidate degree.", required=True)
    df_residual = integer("Residual degrees of freedom.")
    rss = number("Residual sum of squares.")
    sigma = number("Residual standard deviation.")
    r_squared = number("Coefficient of determination.")
    adj_r_squared = number("Adjusted r_squared.")
    aic = number("AIC.")
    aicc = number("Corrected AIC.")
    bic = number("BIC.")
    press = number("PRESS.")
    f_last = number("F statistic of the highest term given the lower ones.")
    p_last = number("p-value of f_last.")


class SelectionSchema(Schema):
    """How the degree was chosen (method fixed when the caller fixed it)."""

    method = text("sequential_f, aic, aicc, bic, press, adj_r2, or fixed.", required=True)
    chosen_degree = integer("The degree reported in model.", required=True)
    reason = text("Why this degree, in plain words.")
    alpha = number("Significance level used by sequential_f.")
    candidates = fields.List(fields.Nested(CandidateSchema), required=True, metadata={
        "description": "Every candidate degree considered, lowest first."})


class TestResultSchema(Schema):
    """A formal assumption test on the residuals."""

    name = text("shapiro_wilk, breusch_pagan, durbin_watson; chi_square_fit with known_sd "
                "weighting.", required=True)
    statistic = number("Test statistic.")
    p_value = number("p-value (null where the test has none).")
    df = fields.List(fields.Float(allow_nan=True, allow_none=True), allow_none=True, metadata={
        "description": "Degrees of freedom, when the test has them."})
    note = text("How to read the result.")


class LackOfFitSchema(Schema):
    """Lack-of-fit F test against pure error from replicated x."""

    df_lack = integer("Lack-of-fit degrees of freedom.")
    ss_lack = number("Lack-of-fit sum of squares.")
    df_pure = integer("Pure-error degrees of freedom.")
    ss_pure = number("Pure-error sum of squares.")
    f = number("F statistic.")
    p_value = number("p-value of f.")
    n_levels = integer("Number of distinct x values.")


class DiagnosticsSchema(Schema):
    """Per-point residual forms and influence, formal tests and flagged points."""

    index = _indices("Original positions of the points used, aligned with the arrays below.")
    residuals = _array("Raw residuals y - fit.")
    standardized = _array("Internally studentized residuals.")
    studentized = _array("Externally studentized residuals.")
    leverage = _array("Diagonal of the hat matrix.")
    cooks_distance = _array("Cook's distance.")
    dffits = _array("DFFITS.")
    tests = fields.List(fields.Nested(TestResultSchema), metadata={
        "description": "Formal assumption tests."})
    lack_of_fit = fields.Nested(LackOfFitSchema, allow_none=True, metadata={
        "description": "Lack-of-fit test; null without replicated x."})
    outliers = _indices("Original positions of points with large studentized residuals.")
    high_leverage = _indices("Original positions of high-leverage points.")
    influential = _indices("Original positions of influential points (Cook's distance).")
    thresholds = fields.Dict(keys=fields.String(),
                             values=fields.Float(allow_nan=True, allow_none=True),
                             metadata={"description": "Cut-offs used for the lists above."})


class GridValuesSchema(Schema):
    """Fitted curve and bands on the grid (original y scale)."""

    x = _array("Grid points.")
    fit = _array("Fitted values.")
    se_mean = _array("Standard error of the fitted mean.")
    mean_lower = _array("Lower confidence limit of the mean.")
    mean_upper = _array("Upper confidence limit of the mean.")
    obs_lower = _array("Lower prediction limit for one new observation.")
    obs_upper = _array("Upper prediction limit for one new observation.")
    band_lower = _array("Lower simultaneous band for the whole curve (Working-Hotelling for "
                        "polynomials; sqrt(p F(p, df)) times the delta-method error for "
                        "nonlinear families).")
    band_upper = _array("Upper simultaneous band for the whole curve.")
    extrapolated = fields.List(fields.Boolean(), metadata={
        "description": "True where the grid point lies outside the fitted x range."})
    unbounded = fields.List(fields.Boolean(), metadata={
        "description": "True where a limit has no finite value on the original y scale and "
                       "is null: the band reaches the pole of the reciprocal transform (the "
                       "interval holding the fit is open on that side), or leaves the double "
                       "range."})
    level = number("Confidence level of the limits.")


class FitResponseSchema(Schema):
    """The full report of one fit. Sections not asked for in include are absent."""

    model = fields.Nested(FittedModelSummarySchema, required=True)
    n = integer("Points used in the fit.", required=True)
    n_input = integer("Points sent (before dropping missing values).")
    dropped = _indices("Original positions of pairs dropped as missing (missing=drop).")
    coefficients = fields.List(fields.Nested(CoefficientSchema), metadata={
        "description": "Coefficients in the raw x scale: intercept, x, x^2, ... (polynomials), "
                       "or the parameters by name with Wald and profile limits (nonlinear)."})
    anova = fields.List(fields.Nested(AnovaRowSchema), metadata={
        "description": "Sequential ANOVA, in the order terms enter; residual last. "
                       "Polynomials only."})
    statistics = fields.Nested(StatisticsSchema)
    selection = fields.Nested(SelectionSchema, metadata={"description": "Polynomials only."})
    comparison = fields.Nested(ComparisonSchema, metadata={
        "description": "With model.candidates: the comparison table and the reason; the "
                       "other sections report the chosen candidate."})
    derived = fields.List(fields.Nested(DerivedSchema), metadata={
        "description": "Built-in families: quantities computed from a parameter (half-lives, "
                       "full width at half maximum) with delta-method and profile limits."})
    fit_info = fields.Nested(FitInfoSchema, metadata={
        "description": "Nonlinear families: start, convergence and why the solver stopped."})
    correlation = fields.List(fields.List(fields.Float(allow_nan=False, allow_none=True)),
                              metadata={"description": "Nonlinear families: correlation "
                                                       "matrix of the parameter estimates, "
                                                       "rows and columns in coefficient order."})
    diagnostics = fields.Nested(DiagnosticsSchema)
    grid = fields.Nested(GridValuesSchema, allow_none=True, metadata={
        "description": "Curve and bands on the grid; null when grid was null."})
    warnings = fields.List(fields.Nested(NoticeSchema), required=True, metadata={
        "description": "Numerical or data warnings."})
    flags = fields.List(fields.Nested(TrustFlagSchema), required=True, metadata={
        "description": "Plain-language reasons to be careful with this fit."})
    fitted_model = FittedModelField(metadata={
        "description": "The portable fitted-model document (versioned, checksummed). Store "
                       "it and send it back unchanged to /v1/predict or /v1/invert."})
