"""Every built-in family by name, in the order ``GET /v1/families`` lists them."""

from __future__ import annotations

from collections.abc import Mapping
from types import MappingProxyType

from service.core.nonlinear.builtin.decay import BIEXPONENTIAL, EXPONENTIAL, WEIBULL
from service.core.nonlinear.builtin.definition import Builtin
from service.core.nonlinear.builtin.dose_response import LOGISTIC4, LOGISTIC5
from service.core.nonlinear.builtin.growth import GOMPERTZ, LOGISTIC_GROWTH
from service.core.nonlinear.builtin.peak import GAUSSIAN_PEAK
from service.core.nonlinear.builtin.saturation import MICHAELIS_MENTEN, POWER

BUILTINS: Mapping[str, Builtin] = MappingProxyType({b.name: b for b in (
    LOGISTIC4, LOGISTIC5, EXPONENTIAL, MICHAELIS_MENTEN, GOMPERTZ, LOGISTIC_GROWTH, POWER,
    GAUSSIAN_PEAK, BIEXPONENTIAL, WEIBULL)})

