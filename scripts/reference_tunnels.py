"""Reference values for the tunnel-table and horizon tests, computed with SciPy.

Regenerate with:
    pip install scipy numpy
    python3 scripts/reference_tunnels.py > tests/reference/tunnels_reference.json

Every value comes from SciPy's own distributions, special functions and quadrature
(scipy.stats survival functions, scipy.special.gammainc, scipy.integrate.quad), never from
tunnelcast. Parameterisations follow the interface contract:
  lognormal   S(t) = 1 - Phi((ln t - mu)/sigma)      -> scipy.stats.lognorm(s=sigma, scale=e^mu)
  loglogistic S(t) = 1/(1 + (t/scale)^shape)         -> scipy.stats.fisk(c=shape, scale=scale)
  gompertz    S(t) = exp(-(rate/shape)(e^(shape t)-1)), shape > 0
                                                     -> scipy.stats.gompertz(c=rate/shape, scale=1/shape)
  weibull     S(t) = exp(-(t/scale)^shape)           -> scipy.stats.weibull_min(c=shape, scale=scale)
CI does not run this script; the JSON it printed is committed.
"""

import json
import math

import scipy
from scipy import integrate, special, stats


def dist(family, params):
    if family == "lognormal":
        return stats.lognorm(s=params["sigma"], scale=math.exp(params["mu"]))
    if family == "loglogistic":
        return stats.fisk(c=params["shape"], scale=params["scale"])
    if family == "gompertz":
        return stats.gompertz(c=params["rate"] / params["shape"], scale=1.0 / params["shape"])
    if family == "weibull":
        return stats.weibull_min(c=params["shape"], scale=params["scale"])
    raise ValueError(family)


def p_exit(d, t0, t1):
    # Conditional exit probability from log survival differences, as SciPy computes logsf.
    return -math.expm1(d.logsf(t1) - d.logsf(t0)) if t0 > 0 else float(d.cdf(t1))


curves = [
    ("lognormal", {"mu": 3.0, "sigma": 0.8}, 1.0, 60),
    # Small sigma: z runs from about -3 to 10, into the far upper tail of the normal.
    ("lognormal", {"mu": 1.0, "sigma": 0.3}, 1.0, 60),
    ("loglogistic", {"shape": 1.7, "scale": 24.0}, 1.0, 60),
    ("gompertz", {"shape": 0.03, "rate": 0.01}, 1.0, 60),
    ("weibull", {"shape": 0.7, "scale": 40.0}, 0.5, 60),
]

tunnels = []
for family, params, cycle, count in curves:
    d = dist(family, params)
    p = [p_exit(d, (k - 1) * cycle, k * cycle) for k in range(1, count + 1)]
    tunnels.append({"family": family, "params": params, "cycle": cycle, "p_exit": p})

restricted = []
for shape, scale, tau in [(0.6, 30.0, 24.0), (1.2, 30.0, 151.0), (2.5, 10.0, 8.0), (1.0, 5.0, 50.0)]:
    closed = scale * special.gamma(1 + 1 / shape) * special.gammainc(1 / shape, (tau / scale) ** shape)
    quad, _ = integrate.quad(lambda t: math.exp(-((t / scale) ** shape)), 0, tau, epsabs=1e-13, epsrel=1e-13, limit=500)
    restricted.append({"shape": shape, "scale": scale, "horizon": tau, "closed_form": closed, "quadrature": quad})

discounted = []
for family, params, horizon, rate in [
    ("lognormal", {"mu": 3.0, "sigma": 0.8}, 120.0, 0.035),
    ("loglogistic", {"shape": 1.7, "scale": 24.0}, 240.0, 0.05),
]:
    d = dist(family, params)
    delta = math.log1p(rate)
    # Time in months; the annual rate is applied to t/12 years.
    value, _ = integrate.quad(lambda t: d.sf(t) * math.exp(-delta * t / 12.0), 0, horizon, epsabs=1e-13, epsrel=1e-13, limit=500)
    discounted.append({"family": family, "params": params, "horizon_months": horizon, "discount": rate, "exact": value})

print(json.dumps({
    "generator": "scripts/reference_tunnels.py with SciPy " + scipy.__version__,
    "tunnels": tunnels,
    "weibull_restricted_mean": restricted,
    "discounted_life_months": discounted,
}, indent=1))
