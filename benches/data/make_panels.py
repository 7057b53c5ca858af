#!/usr/bin/env python3
"""Invented data and scenarios for the benchmark: sizes S, M and L of one INVENTED economy.

Nothing here is real: the 40 series are simulated from a made-up dynamic factor model with a
fixed seed, for timing the engine on models of the size scenario teams use. Run from the
project root (numpy 2.4.6):

    python3 benches/data/make_panels.py

It writes benches/data/panel.csv (quarterly, 1986Q1 to 2025Q4, 160 rows, 40 series) and, for
each size, a scenario with the Minnesota prior (tightness by marginal likelihood) and one with
fixed coefficients:

    size  series  lags  horizon  conditions
    S     8       4     12       3 pins
    M     20      4     20       5 pins, corridors on 3 series over all 20 periods
    L     40      4     20       3 pins, one corridor over all 20 periods

plus rare.ron and rare-deep.ron (the S model with a corridor of probability about 1e-3 and
1e-4, for the comparison with naive rejection). The fixed coefficients are a ridge estimate (numpy least squares on the
augmented system, shrunk towards random walks) on the same data: a stand-in for coefficients a
team already has.

The invented model (quarter t): five factors f_t (demand, prices, finance, housing, rates)
follow a stable VAR(2) with correlated innovations. A level series (index, 100·log in the
model) grows by g_i + λ_i'f_t + e_it, its idiosyncratic part AR(1); a rate moves as
r_it = r̄_i + ρ_i (r_i,t−1 − r̄_i) + λ_i'f_t + e_it. Loadings are drawn once from the seed,
with signs fixed by the series' role (unemployment against demand, spreads with finance...).
"""

from pathlib import Path

import numpy as np

SEED = 4471
FIRST_YEAR, LAST_YEAR = 1986, 2025
BURN_IN = 60
OUT = Path("benches/data")

# name, kind ("level" or "rate"), mean growth (%/quarter) or mean level, signs of loadings on
# (demand, prices, finance, housing, rates), idiosyncratic scale.
SERIES = [
    ("output", "level", 0.5, (1, 0, 0, 0.2, -0.2), 0.4),
    ("unemployment", "rate", 6.5, (-1, 0, 0, 0, 0.1), 0.10),
    ("consumer_prices", "level", 0.55, (0.2, 1, 0, 0, 0), 0.15),
    ("policy_rate", "rate", 3.5, (0.3, 0.5, 0, 0, 1), 0.15),
    ("house_prices", "level", 1.0, (0.3, 0.1, 0, 1, -0.4), 0.8),
    ("credit_spread", "rate", 2.0, (-0.3, 0, 1, 0, 0), 0.10),
    ("equity_prices", "level", 1.5, (0.6, 0, -1, 0, -0.3), 4.0),
    ("bank_lending", "level", 1.2, (0.4, 0, -0.5, 0.5, -0.2), 0.5),
    ("consumption", "level", 0.5, (0.9, -0.2, 0, 0.3, -0.1), 0.4),
    ("investment", "level", 0.6, (1.5, 0, -0.4, 0.2, -0.3), 1.5),
    ("exports", "level", 0.7, (0.8, -0.3, 0, 0, 0), 1.2),
    ("imports", "level", 0.7, (1.0, 0.2, 0, 0, 0), 1.2),
    ("employment", "level", 0.25, (0.6, 0, 0, 0, 0), 0.2),
    ("wages", "level", 0.8, (0.3, 0.6, 0, 0, 0), 0.3),
    ("core_prices", "level", 0.5, (0.1, 0.7, 0, 0, 0), 0.1),
    ("bill_rate", "rate", 3.6, (0.3, 0.5, 0.1, 0, 1), 0.15),
    ("yield_2y", "rate", 4.0, (0.3, 0.4, 0.1, 0, 0.8), 0.2),
    ("yield_10y", "rate", 5.0, (0.2, 0.3, 0.2, 0, 0.5), 0.2),
    ("mortgage_rate", "rate", 5.5, (0.2, 0.3, 0.4, 0, 0.7), 0.15),
    ("household_credit", "level", 1.1, (0.3, 0, -0.3, 0.6, -0.2), 0.4),
    ("firm_credit", "level", 1.0, (0.5, 0, -0.6, 0, -0.2), 0.6),
    ("deposits", "level", 1.1, (0.3, 0.2, 0.2, 0, -0.1), 0.5),
    ("money", "level", 1.2, (0.3, 0.3, 0.2, 0, -0.3), 0.6),
    ("exchange_rate", "level", 0.0, (0.2, -0.2, -0.4, 0, 0.6), 2.0),
    ("import_prices", "level", 0.5, (0.2, 0.8, 0, 0, -0.3), 1.0),
    ("producer_prices", "level", 0.5, (0.3, 0.9, 0, 0, 0), 0.5),
    ("government_spending", "level", 0.5, (-0.2, 0, 0, 0, 0), 0.6),
    ("industrial_output", "level", 0.4, (1.3, 0, -0.2, 0, -0.1), 1.0),
    ("services_output", "level", 0.6, (0.9, 0, 0, 0.1, -0.1), 0.3),
    ("construction_output", "level", 0.4, (0.8, 0, -0.2, 0.9, -0.3), 1.5),
    ("retail_sales", "level", 0.6, (0.9, -0.2, 0, 0.2, 0), 0.8),
    ("house_prices_north", "level", 0.9, (0.3, 0.1, 0, 0.9, -0.3), 1.0),
    ("house_prices_south", "level", 1.1, (0.3, 0.1, 0, 1.1, -0.4), 1.0),
    ("commercial_property", "level", 0.7, (0.5, 0, -0.6, 0.6, -0.4), 1.5),
    ("corporate_yield", "rate", 6.0, (-0.2, 0.3, 0.8, 0, 0.6), 0.2),
    ("bank_equity", "level", 1.2, (0.6, 0, -1.4, 0.2, 0.2), 5.0),
    ("insolvencies", "level", 0.0, (-1.2, 0, 0.8, -0.2, 0.3), 3.0),
    ("vacancies", "rate", 2.5, (0.5, 0, 0, 0, 0), 0.1),
    ("hours_worked", "level", 0.1, (0.5, 0, 0, 0, 0), 0.3),
    ("capacity_use", "rate", 80.0, (1.5, 0, 0, 0, 0), 0.6),
]


def simulate():
    rng = np.random.default_rng(SEED)
    n_obs = (LAST_YEAR - FIRST_YEAR + 1) * 4
    total = BURN_IN + n_obs
    k = 5
    a1 = np.diag([1.2, 0.8, 0.7, 1.3, 0.9])
    a2 = np.diag([-0.35, 0.1, 0.0, -0.4, 0.0])
    a1[0, 2] = -0.15  # financial stress lowers demand
    a1[0, 4] = -0.10  # higher rates lower demand
    a1[1, 0] = 0.15   # demand raises prices
    a1[4, 1] = 0.30   # rates follow prices
    a1[4, 0] = 0.20   # ... and demand
    a1[3, 4] = -0.15  # housing falls with rates
    a1[2, 3] = -0.10  # housing busts feed finance
    chol = np.linalg.cholesky(np.array([
        [1.0, 0.1, -0.3, 0.2, 0.1],
        [0.1, 1.0, 0.0, 0.0, 0.2],
        [-0.3, 0.0, 1.0, -0.2, 0.0],
        [0.2, 0.0, -0.2, 1.0, 0.0],
        [0.1, 0.2, 0.0, 0.0, 1.0],
    ])) * 0.5
    f = np.zeros((total, k))
    for t in range(2, total):
        f[t] = a1 @ f[t - 1] + a2 @ f[t - 2] + chol @ rng.standard_normal(k)
    n = len(SERIES)
    magnitude = rng.uniform(0.6, 1.4, size=(n, k))
    rho_idio = rng.uniform(0.2, 0.6, size=n)
    rho_rate = rng.uniform(0.85, 0.95, size=n)
    e = np.zeros((total, n))
    noise = rng.standard_normal((total, n))
    for t in range(1, total):
        e[t] = rho_idio * e[t - 1] + noise[t]
    data = np.zeros((total, n))
    for i, (name, kind, centre, signs, scale) in enumerate(SERIES):
        load = np.array(signs) * magnitude[i]
        common = f @ load
        if kind == "level":
            growth = centre + 0.5 * common + scale * e[:, i]
            data[:, i] = 100.0 * np.exp(np.cumsum(growth) / 100.0)
        else:
            r = np.zeros(total)
            r[0] = centre
            for t in range(1, total):
                r[t] = centre + rho_rate[i] * (r[t - 1] - centre) + 0.15 * common[t] \
                    + scale * e[t, i]
            data[:, i] = r
    data = data[BURN_IN:]
    # Index levels: 100 on average over the first year kept.
    for i, (_, kind, *_rest) in enumerate(SERIES):
        if kind == "level":
            data[:, i] *= 100.0 / data[:4, i].mean()
    return data


def dates():
    return [f"{y}Q{q}" for y in range(FIRST_YEAR, LAST_YEAR + 1) for q in range(1, 5)]


def write_csv(data):
    lines = ["date," + ",".join(s[0] for s in SERIES)]
    for d, row in zip(dates(), data):
        lines.append(d + "," + ",".join(f"{v:.6g}" for v in row))
    (OUT / "panel.csv").write_text("\n".join(lines) + "\n")


def model_units(data, n):
    cols = []
    for i in range(n):
        kind = SERIES[i][1]
        cols.append(100.0 * np.log(data[:, i]) if kind == "level" else data[:, i])
    return np.column_stack(cols)


def ridge(y, p, tightness=0.2):
    """Coefficients shrunk towards random walks: least squares on the data stacked with
    prior rows (one per regressor), the lag-l rows of series j weighted by l·s_j/λ."""
    t, n = y.shape
    x = np.column_stack([np.ones(t - p)] + [y[p - l:t - l] for l in range(1, p + 1)])
    yy = y[p:]
    s = np.array([np.std(np.diff(y[:, j])) for j in range(n)])
    k = 1 + n * p
    prior_x = np.zeros((k, k))
    prior_y = np.zeros((k, n))
    prior_x[0, 0] = 1e-3
    for l in range(1, p + 1):
        for j in range(n):
            r = 1 + (l - 1) * n + j
            w = l * s[j] / tightness
            prior_x[r, r] = w
            if l == 1:
                prior_y[r, j] = w
    b, *_ = np.linalg.lstsq(np.vstack([x, prior_x]), np.vstack([yy, prior_y]), rcond=None)
    resid = yy - x @ b
    sigma = resid.T @ resid / (t - p)
    return b, (sigma + sigma.T) / 2


def fixed_ron(b, sigma, n, p):
    def row(v):
        return "[" + ", ".join(f"{x:.10e}" for x in v) + "]"
    intercept = row(b[0])
    lags = []
    for l in range(p):
        rows = [row([b[1 + l * n + j, i] for j in range(n)]) for i in range(n)]
        lags.append("[\n            " + ",\n            ".join(rows) + "]")
    sig = ",\n            ".join(row(sigma[i]) for i in range(n))
    return ("fixed((\n        intercept: " + intercept + ",\n        lags: [" +
            ", ".join(lags) + "],\n        sigma: [\n            " + sig + "]))")


def quarter(h):
    """The period h quarters after 2025Q4."""
    y, q = divmod(3 + h, 4)
    return f"{2025 + y}Q{q + 1}"


def scenario(size, n, horizon, pins, corridors, model, what):
    series = []
    for name, kind, *_ in SERIES[:n]:
        if kind == "level":
            series.append(f'        (name: "{name}", transform: log100, display: year_on_year),')
        else:
            series.append(f'        (name: "{name}"),')
    pin_text = "\n".join(f"        {p}," for p in pins)
    corr_text = "\n".join(f"        {c}," for c in corridors)
    return f"""// Benchmark scenario {size} ({what}): invented data (benches/data/make_panels.py), nothing real.
(
    name: "Benchmark {size}, {what}",
    narrative: "An invented downturn for timing the engine.",
    dataset: "panel.csv",
    series: [
{chr(10).join(series)}
    ],
    model: {model},
    horizon: {horizon},
    draws: 2000,
    seed: 11,
    pins: [
{pin_text}
    ],
    corridors: [
{corr_text}
    ],
)
"""


def main():
    data = simulate()
    write_csv(data)
    last = {s[0]: data[-1, i] for i, s in enumerate(SERIES)}
    u, i_rate = last["unemployment"], last["policy_rate"]
    pins3 = [
        f'(series: "unemployment", period: "{quarter(6)}", value: {u + 1.5:.2f})',
        f'(series: "policy_rate", period: "{quarter(4)}", value: {i_rate - 0.6:.2f})',
        f'(series: "output", period: "{quarter(8)}", units: year_on_year, value: -1.5)',
    ]
    pins5 = pins3 + [
        f'(series: "house_prices", period: "{quarter(8)}", units: year_on_year, value: -8.0)',
        f'(series: "credit_spread", period: "{quarter(3)}", value: {last["credit_spread"] + 1.0:.2f})',
    ]
    rate_corridor = (f'(series: "policy_rate", from: "{quarter(1)}", to: "{quarter(20)}", '
                     f'lower: {i_rate - 3.5:.2f}, upper: {i_rate + 1.5:.2f})')
    m_corridors = [
        rate_corridor,
        f'(series: "unemployment", from: "{quarter(1)}", to: "{quarter(20)}", upper: {u + 4.0:.2f})',
        f'(series: "house_prices", from: "{quarter(1)}", to: "{quarter(20)}", units: year_on_year, lower: -25.0)',
    ]
    sizes = {
        "s": (8, 12, pins3, []),
        "m": (20, 20, pins5, m_corridors),
        "l": (40, 20, pins3, [rate_corridor]),
    }
    p = 4
    for size, (n, horizon, pins, corridors) in sizes.items():
        y = model_units(data, n)
        b, sigma = ridge(y, p)
        minnesota = "minnesota((lags: 4, tightness: auto))"
        (OUT / f"{size}-estimated.ron").write_text(
            scenario(size.upper(), n, horizon, pins, corridors, minnesota, "estimated"))
        (OUT / f"{size}-fixed.ron").write_text(
            scenario(size.upper(), n, horizon, pins, corridors, fixed_ron(b, sigma, n, p),
                     "fixed coefficients"))
    rare = [f'(series: "policy_rate", from: "{quarter(1)}", to: "{quarter(8)}", '
            f'lower: {i_rate - 0.45:.2f}, upper: {i_rate + 0.45:.2f})']
    y = model_units(data, 8)
    b, sigma = ridge(y, p)
    (OUT / "rare.ron").write_text(scenario("rare corridor", 8, 12, pins3[:1], rare,
                                           fixed_ron(b, sigma, 8, p), "fixed coefficients"))
    deep = [f'(series: "policy_rate", from: "{quarter(1)}", to: "{quarter(8)}", '
            f'lower: {i_rate - 0.25:.2f}, upper: {i_rate + 0.25:.2f})']
    (OUT / "rare-deep.ron").write_text(scenario("rarer corridor", 8, 12, pins3[:1], deep,
                                                fixed_ron(b, sigma, 8, p), "fixed coefficients"))


if __name__ == "__main__":
    main()
