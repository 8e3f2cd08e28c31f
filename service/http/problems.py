"""The error catalogue: every problem code this service can answer with.

Each problem document's ``type`` is the relative URI reference
``/problems/<code>`` (RFC 9457 allows relative references; they resolve
against the request URL), and this server serves a page there that explains
the problem. The same name is repeated in the ``code`` member for clients
that prefer a plain string. The README's error catalogue lists the same codes
(a test keeps them in step).
"""

from __future__ import annotations

from dataclasses import dataclass

TYPE_BASE = "/problems/"


@dataclass(frozen=True, slots=True)
class ProblemKind:
    """One entry of the catalogue."""

    code: str
    status: int
    title: str
    when: str
    fix: str


CATALOGUE: dict[str, ProblemKind] = {kind.code: kind for kind in (
    ProblemKind("invalid_json", 400, "Unparsable body",
                "The body is not strict JSON (including the non-JSON tokens NaN and Infinity) "
                "or is not UTF-8.",
                "Send valid JSON. Write a missing value as null (with \"missing\": \"drop\")."),
    # answered by the proxy in front (the nginx configuration of docs/operations.md) for
    # requests it refuses before any worker sees them; the service serves their pages
    ProblemKind("malformed_request", 400, "Malformed request",
                "The request line or headers are not valid HTTP/1.1 (a bad or doubled "
                "Content-Length, Transfer-Encoding with Content-Length); refused by the proxy.",
                "Send a well-formed HTTP/1.1 request (let your HTTP library frame it)."),
    ProblemKind("uri_too_long", 414, "URI too long",
                "The request line is longer than the proxy accepts; refused by the proxy.",
                "Send a shorter URL: data go in the body."),
    ProblemKind("headers_too_large", 431, "Headers too large",
                "A header line is longer than the proxy accepts; refused by the proxy.",
                "Send shorter headers."),
    ProblemKind("unsupported_transfer_coding", 501, "Transfer coding not supported",
                "The body uses a transfer coding other than chunked; refused by the proxy.",
                "Send the body with a Content-Length, or chunked."),
    ProblemKind("not_found", 404, "Not found", "No resource at this path.",
                "See GET /openapi.json or /docs for the paths."),
    ProblemKind("method_not_allowed", 405, "Method not allowed",
                "The path exists but not for this HTTP method; the Allow header lists the "
                "methods it accepts.", "Use one of the methods in the Allow header."),
    ProblemKind("body_too_large", 413, "Body too large",
                "The request body is larger than CURVEWISE_MAX_BODY_BYTES; it is refused "
                "before it is read.", "Send less data per request, or raise the limit."),
    ProblemKind("too_many_points", 413, "Too many points",
                "A series has more points than CURVEWISE_MAX_POINTS.",
                "Split the series, or raise the limit."),
    ProblemKind("unsupported_media_type", 415, "Unsupported media type",
                "The body is not sent as application/json.",
                "Send the header Content-Type: application/json."),
    ProblemKind("validation_error", 422, "Invalid request",
                "A field is missing, unknown, of the wrong type or out of range.",
                "Read errors: each field path comes with what to fix."),
    ProblemKind("limit_exceeded", 422, "Over a limit",
                "The degree is over CURVEWISE_MAX_DEGREE or the grid has more points than "
                "CURVEWISE_MAX_GRID_POINTS.", "Ask for less, or raise the limit."),
    ProblemKind("invalid_data", 422, "Unusable data",
                "Arrays of different lengths, empty arrays, missing values (null) without "
                "\"missing\": \"drop\", values too large in magnitude, weights <= 0, or "
                "weights whose largest / smallest ratio is over 1e16; messages name every "
                "offending index.",
                "Fix the array named in errors."),
    ProblemKind("transform_domain", 422, "Value outside the transform's domain",
                "A value is outside the domain of the requested transform (e.g. log of x <= 0), "
                "or an x < 0 for a curve defined for x >= 0 only (a built-in curve on log x, "
                "power, weibull): in the data, the grid or the x of /v1/predict.",
                "Choose another transform or scale, or remove the point."),
    ProblemKind("insufficient_design", 422, "Too little information for the model",
                "Too few points or distinct x values for the degree, or a rank-deficient design.",
                "Lower the degree, or add points at new x values."),
    ProblemKind("invalid_spec", 422, "Inconsistent model or options",
                "The model and the options do not make sense together.",
                "Follow the fix given in detail."),
    ProblemKind("invalid_expression", 422, "Model equation not accepted",
                "model.expression is not a plain arithmetic expression in x and the declared "
                "parameters, or is over a size limit; detail gives the column.",
                "Use numbers, + - * /, ^ for powers, parentheses and exp, log, log10, sqrt, sin, "
                "cos, tan, arctan, abs, pi; declare every parameter in model.parameters."),
    ProblemKind("invalid_document", 422, "Invalid fitted-model document",
                "A fitted-model document is malformed, of an unknown version, fails its "
                "checksum, or is a whole /v1/fit answer instead of its fitted_model field.",
                "Send the document back exactly as /v1/fit returned it."),
    ProblemKind("unfittable_input", 422, "Unfittable input",
                "The input cannot be fitted as asked. When no candidate of a comparison can "
                "be fitted, errors also names each candidate's own error and fix under "
                "model.candidates[i].", "Follow the fix given in detail (or in errors)."),
    ProblemKind("internal_error", 500, "Internal error",
                "A bug in Curvewise: no input should cause this.",
                "Report it, with the request if you can."),
    ProblemKind("timeout", 503, "Computation timed out",
                "The computation took longer than CURVEWISE_REQUEST_TIMEOUT seconds.",
                "Send less data per request, or use /v1/batch."),
)}

STATUS_CODES = {404: "not_found", 405: "method_not_allowed", 413: "body_too_large",
                415: "unsupported_media_type", 400: "invalid_json", 422: "validation_error",
                500: "internal_error", 503: "timeout"}


def kind_for(code: str | None, status: int) -> ProblemKind:
    """The catalogue entry for ``code``, or a generic one for a status without a code."""
    if code in CATALOGUE:
        return CATALOGUE[code]
    if status in STATUS_CODES:
        return CATALOGUE[STATUS_CODES[status]]
    return ProblemKind(code or f"http_{status}", status, "HTTP error", "", "")


def type_uri(code: str) -> str:
    """``/problems/<code>`` for catalogued codes; ``about:blank`` (RFC 9457) otherwise."""
    return TYPE_BASE + code if code in CATALOGUE else "about:blank"


def register_kind(kind: ProblemKind) -> None:
    """Add a problem kind (e.g. from an ops module); its page is then served too."""
    CATALOGUE[kind.code] = kind
