#!/usr/bin/env python3
"""Generate the demo dataset: an INVENTED economy, the Republic of Vellmark.

Everything here is made up for the tiltyard demo only. Vellmark is not a real
country, its central bank and banks are not real institutions, and no series,
date or episode is taken from any real economy or data set. Do not use this
file for anything but trying out the tool.

Run from the project root:

    python3 scenarios-demo/generate_economy.py

It writes scenarios-demo/economy.csv (quarterly, 1990Q1 to 2025Q4, 144 rows):

    date,output,consumer_prices,unemployment,policy_rate,long_yield,
    house_prices,equity_prices,credit_spread,bank_lending,wages

The simulation is deterministic: a fixed seed (SEED below) for numpy's
default_rng, standard normal draws taken in a fixed order, so every run gives
the same file bit for bit (with the same numpy).

Sketch of the invented model (quarter t; x, h, q, l in percent per quarter;
pi and w annualised quarterly rates in percent; pi4 the four-quarter average of
pi; "*" marks anchors; e_* are shocks):

    potential    100 log Y*_t = 100 log Y*_{t-1} + mu_t,
                       mu_t about 0.56 before 2000 and 0.44 after 2012 (~2%/yr)
    output gap   x_t = 1.25 x_{t-1} - 0.40 x_{t-2}                AR(2) cycle
                       - 0.08 (i_{t-1} - pi4_{t-1} - r*_t)        real-rate gap
                       - 0.12 (s_{t-1} - s*)                      credit spread
                       + 0.04 (h_{t-1} - h*_t) + 0.01 (q_{t-1} - q*) + e_x
    output       100 log Y_t = 100 log Y*_t + x_t
    inflation    pi_t = pi*_t + 0.50 (pi_{t-1} - pi*_t) + 0.20 (pi4_{t-1} - pi*_t)
                       + 0.15 x_{t-1} + e_pi                      Phillips curve
    unemployment u_t = u*_t + 0.75 (u_{t-1} - u*_{t-1}) - 0.12 x_t + e_u
                       (Okun: about -0.5 point per point of gap in the long run)
    policy rate  i_t = max(0.25, 0.80 i_{t-1} + 0.20 [r*_t + pi4_t
                       + 0.5 (pi4_t - pi*_t) + 0.5 x_t] + e_i)    smoothed Taylor rule
    long yield   ly_t = r*_t + pi*_t + 0.38 (i_t - r*_t - pi*_t) + tp_t
                       (0.38 = 10-year average of a policy gap decaying at 0.94),
                       tp_t = 0.90 tp_{t-1} + 0.10 tp* + e_tp     term premium AR(1)
    house prices h_t = 0.55 h_{t-1} + 0.25 h_{t-2} + 0.20 h*_t
                       - 0.25 (ly_{t-1} - ly*_t) + 0.10 x_{t-1}
                       - 1.5 log(house prices / nominal output)_{t-1} + e_h
    equities     q_t = 0.9 q* + 0.1 q_{t-1} + 2.0 (x_t - x_{t-1})
                       - 3.0 (s_t - s_{t-1}) - 0.8 (i_t - i_{t-1}) + e_q
    spread       s_t = s* + 0.75 (s_{t-1} - s*) - 0.06 x_t - 0.25 (x_t - x_{t-1})
                       + e_s                                      countercyclical
    bank lending l_t = 0.60 l_{t-1} + 0.40 [l*_t + 0.25 x_{t-1}
                       - 0.30 (s_{t-1} - s*) + 0.25 (h_{t-1} - h*_t)] + e_l
    wages        w_t = 0.55 w_{t-1} + 0.45 [1.4 + 0.7 pi4_{t-1} + 0.3 pi*_t
                       - 0.8 (u_{t-1} - u*_{t-1})] + e_w

Anchors: s* = 2.0, tp* = 1.0, q* = 1.6; h* and l* follow trend nominal output
growth (l* one point a year faster). The inflation anchor pi* falls from 4.5%
to the invented 2.5% target in an early-1990s disinflation, the neutral real
rate r* declines from 2.5% (1995) to 0.75% (2015), and equilibrium
unemployment u* eases from 6.8% to 5.4% (1992-2012). Shocks are independent
normals, except that the financial ones (spread, equities, term premium) also
load on a common "stress" draw, so equities fall when spreads jump. The model
runs 40 quarters before 1990Q1 from its steady state; those are dropped.

Invented episodes, made by bursts of shocks added to the random ones (never by
pasting paths):

  * 1997Q3-1998Q3  "the Vellmark funding squeeze": a run on the banks'
    wholesale funding. Spread shocks jump, equities fall, lending and demand
    shocks turn negative: the spread peaks near 5.4%, equities lose about a
    third on the year, output falls for three quarters in 1998.
  * 2006-2010 a credit-fed housing boom, then the 2012Q1-2013Q3 housing
    correction: house prices fall 15% on the year (30% peak to trough),
    lending contracts, unemployment rises to 7.5% and the policy rate
    reaches its 0.25% floor in 2014.
  * 2021Q3-2023Q2 an inflation surge: a run of cost-push shocks (and some
    wage catch-up) on top of an already warm economy. Inflation peaks above
    6% in 2022, the policy rate above 7% in 2023, and both come down by 2025.

Indices (output, consumer_prices, house_prices, equity_prices, bank_lending,
wages) are rescaled so that their 1990 average is 100.
"""

from pathlib import Path

import numpy as np

SEED = 260
START_YEAR, END_YEAR = 1990, 2025
BURN_IN = 40  # quarters simulated before 1990Q1 and then dropped

HEADER = [
    "date",
    "output",
    "consumer_prices",
    "unemployment",
    "policy_rate",
    "long_yield",
    "house_prices",
    "equity_prices",
    "credit_spread",
    "bank_lending",
    "wages",
]

RATE_FLOOR = 0.25
SPREAD_STAR = 2.0
TERM_PREMIUM_STAR = 1.0
EQUITY_DRIFT = 1.6  # % per quarter, nominal, on average
PRODUCTIVITY = 1.4  # % per year, trend real wage growth


def smooth_step(t, start, end, before, after):
    """Move smoothly from `before` to `after` between fractional years start and end."""
    z = np.clip((t - start) / (end - start), 0.0, 1.0)
    z = z * z * (3.0 - 2.0 * z)
    return before + (after - before) * z


def quarter_index(year, quarter):
    """Row of year/quarter in the full simulated sample (burn-in included)."""
    return BURN_IN + (year - START_YEAR) * 4 + (quarter - 1)


def add_burst(shocks, name, first, last, values):
    """Add `values` (one per quarter, or one for all) to a shock, first to last."""
    i0, i1 = quarter_index(*first), quarter_index(*last)
    shocks[name][i0 : i1 + 1] += values


def simulate(seed=SEED):
    n_obs = (END_YEAR - START_YEAR + 1) * 4
    n = BURN_IN + n_obs
    years = START_YEAR + (np.arange(n) - BURN_IN) / 4.0  # fractional year of each row

    rng = np.random.default_rng(seed)
    names = ["x", "pi", "u", "i", "tp", "h", "q", "s", "l", "w", "stress", "mu"]
    draws = rng.standard_normal((n, len(names)))
    z = {name: draws[:, k] for k, name in enumerate(names)}

    # Shock standard deviations (percentage points); financial shocks load on stress.
    shocks = {
        "x": 0.45 * z["x"],
        "pi": 0.55 * z["pi"],
        "u": 0.10 * z["u"],
        "i": 0.12 * z["i"],
        "tp": 0.12 * z["tp"] + 0.04 * z["stress"],
        "h": 0.80 * z["h"],
        "q": 5.0 * z["q"] - 2.5 * z["stress"],
        "s": 0.08 * z["s"] + 0.08 * z["stress"],
        "l": 0.45 * z["l"],
        "w": 0.50 * z["w"],
    }

    # --- Invented episodes: bursts of shocks ------------------------------
    # 1997Q3-1998Q3: the Vellmark funding squeeze.
    add_burst(shocks, "s", (1997, 3), (1998, 2), [1.1, 1.6, 0.8, 0.3])
    add_burst(shocks, "q", (1997, 3), (1998, 2), [-6.0, -9.0, -5.0, -2.0])
    add_burst(shocks, "x", (1997, 4), (1998, 3), [-0.5, -0.8, -0.6, -0.3])
    add_burst(shocks, "l", (1997, 4), (1998, 3), [-0.6, -0.9, -0.6, -0.3])
    add_burst(shocks, "tp", (1997, 3), (1997, 4), [0.3, 0.4])
    # 2006-2010: a credit-fuelled housing boom (small positive shocks, persistent).
    add_burst(shocks, "h", (2006, 1), (2010, 4), 0.35)
    add_burst(shocks, "l", (2006, 3), (2010, 4), 0.15)
    add_burst(shocks, "s", (2007, 1), (2010, 4), -0.04)
    # 2012Q1-2013Q3: the housing correction.
    add_burst(shocks, "h", (2012, 1), (2013, 2), [-1.2, -1.6, -1.8, -1.4, -0.9, -0.4])
    add_burst(shocks, "l", (2012, 2), (2013, 3), [-0.4, -0.6, -0.7, -0.6, -0.4, -0.2])
    add_burst(shocks, "x", (2012, 2), (2013, 2), [-0.4, -0.6, -0.6, -0.5, -0.3])
    add_burst(shocks, "s", (2012, 2), (2012, 4), [0.2, 0.3, 0.2])
    add_burst(shocks, "q", (2012, 2), (2012, 3), [-4.0, -3.0])
    # 2021Q3-2023Q2: the inflation surge (cost-push), demand firm at first.
    add_burst(shocks, "pi", (2021, 4), (2022, 4), [1.0, 1.6, 2.0, 1.4, 0.6])
    add_burst(shocks, "x", (2021, 3), (2022, 1), [0.3, 0.3, 0.2])
    add_burst(shocks, "w", (2022, 3), (2023, 2), [0.4, 0.6, 0.5, 0.3])

    # --- Slowly moving anchors (invented) ---------------------------------
    pi_star = smooth_step(years, 1990.5, 1995.0, 4.5, 2.5)
    r_star = smooth_step(years, 1995.0, 2015.0, 2.5, 0.75)
    u_star = smooth_step(years, 1992.0, 2012.0, 6.8, 5.4)
    mu = 0.5 + smooth_step(years, 2000.0, 2012.0, 0.06, -0.06) + 0.03 * z["mu"]
    i_star = r_star + pi_star
    ly_star = i_star + TERM_PREMIUM_STAR
    h_star = (pi_star + 4.0 * mu) / 4.0  # trend house-price growth ~ nominal output
    l_star = (pi_star + 4.0 * mu + 1.0) / 4.0  # lending grows a bit faster than GDP

    # --- State arrays, started at the steady state (burn-in drops the start) -
    x = np.zeros(n)  # output gap, %
    log_pot = np.zeros(n)  # 100 * log potential output
    pi = pi_star.copy()  # inflation, % annualised
    pi4 = pi_star.copy()  # four-quarter average inflation
    u = u_star.copy()
    i = i_star.copy()
    tp = np.full(n, TERM_PREMIUM_STAR)
    ly = ly_star.copy()
    h = h_star.copy()  # house-price growth, % per quarter
    q = np.full(n, EQUITY_DRIFT)  # equity return, % per quarter
    s = np.full(n, SPREAD_STAR)
    l = l_star.copy()  # lending growth, % per quarter
    w = pi_star + PRODUCTIVITY  # wage growth, % annualised
    log_p = np.zeros(n)
    log_h = np.zeros(n)
    log_q = np.zeros(n)
    log_l = np.zeros(n)
    log_w = np.zeros(n)
    log_y = np.zeros(n)

    e = shocks
    for t in range(2, n):
        log_pot[t] = log_pot[t - 1] + mu[t]

        real_gap = i[t - 1] - pi4[t - 1] - r_star[t]
        x[t] = (
            1.25 * x[t - 1]
            - 0.40 * x[t - 2]
            - 0.08 * real_gap
            - 0.12 * (s[t - 1] - SPREAD_STAR)
            + 0.04 * (h[t - 1] - h_star[t])
            + 0.01 * (q[t - 1] - EQUITY_DRIFT)
            + e["x"][t]
        )
        log_y[t] = log_pot[t] + x[t]

        pi[t] = (
            pi_star[t]
            + 0.50 * (pi[t - 1] - pi_star[t])
            + 0.20 * (pi4[t - 1] - pi_star[t])
            + 0.15 * x[t - 1]
            + e["pi"][t]
        )
        pi4[t] = (pi[t] + pi[t - 1] + pi[t - 2] + pi[t - 3]) / 4.0 if t >= 3 else pi[t]
        log_p[t] = log_p[t - 1] + pi[t] / 4.0

        u[t] = u_star[t] + 0.75 * (u[t - 1] - u_star[t - 1]) - 0.12 * x[t] + e["u"][t]

        notional = r_star[t] + pi4[t] + 0.5 * (pi4[t] - pi_star[t]) + 0.5 * x[t]
        i[t] = max(RATE_FLOOR, 0.80 * i[t - 1] + 0.20 * notional + e["i"][t])

        tp[t] = 0.90 * tp[t - 1] + 0.10 * TERM_PREMIUM_STAR + e["tp"][t]
        rho, horizon = 0.94, 40
        avg_decay = (1.0 - rho**horizon) / (horizon * (1.0 - rho))
        ly[t] = i_star[t] + (i[t] - i_star[t]) * avg_decay + tp[t]

        # House prices: valuation = house prices relative to nominal output.
        valuation = (log_h[t - 1] - log_p[t - 1] - log_y[t - 1]) / 100.0
        h[t] = (
            0.55 * h[t - 1]
            + 0.25 * h[t - 2]
            + 0.20 * h_star[t]
            - 0.25 * (ly[t - 1] - ly_star[t])
            + 0.10 * x[t - 1]
            - 1.5 * valuation
            + e["h"][t]
        )
        log_h[t] = log_h[t - 1] + h[t]

        s[t] = (
            SPREAD_STAR
            + 0.75 * (s[t - 1] - SPREAD_STAR)
            - 0.06 * x[t]
            - 0.25 * (x[t] - x[t - 1])
            + e["s"][t]
        )

        q[t] = (
            0.9 * EQUITY_DRIFT
            + 0.10 * q[t - 1]
            + 2.0 * (x[t] - x[t - 1])
            - 3.0 * (s[t] - s[t - 1])
            - 0.8 * (i[t] - i[t - 1])
            + e["q"][t]
        )
        log_q[t] = log_q[t - 1] + q[t]

        l[t] = 0.60 * l[t - 1] + 0.40 * (
            l_star[t]
            + 0.25 * x[t - 1]
            - 0.30 * (s[t - 1] - SPREAD_STAR)
            + 0.25 * (h[t - 1] - h_star[t])
        ) + e["l"][t]
        log_l[t] = log_l[t - 1] + l[t]

        w[t] = 0.55 * w[t - 1] + 0.45 * (
            PRODUCTIVITY
            + 0.7 * pi4[t - 1]
            + 0.3 * pi_star[t]
            - 0.8 * (u[t - 1] - u_star[t - 1])
        ) + e["w"][t]
        log_w[t] = log_w[t - 1] + w[t] / 4.0

    keep = slice(BURN_IN, n)
    base = slice(BURN_IN, BURN_IN + 4)  # 1990

    def index(log100):
        level = np.exp(log100 / 100.0)
        return 100.0 * level[keep] / level[base].mean()

    return {
        "output": index(log_y),
        "consumer_prices": index(log_p),
        "unemployment": u[keep],
        "policy_rate": i[keep],
        "long_yield": ly[keep],
        "house_prices": index(log_h),
        "equity_prices": index(log_q),
        "credit_spread": s[keep],
        "bank_lending": index(log_l),
        "wages": index(log_w),
    }


def main():
    data = simulate()
    dates = [f"{y}Q{q}" for y in range(START_YEAR, END_YEAR + 1) for q in range(1, 5)]
    lines = [",".join(HEADER)]
    for row, date in enumerate(dates):
        values = [data[name][row] for name in HEADER[1:]]
        lines.append(date + "," + ",".join(f"{v:.4f}" for v in values))
    out = Path(__file__).resolve().parent / "economy.csv"
    out.write_text("\n".join(lines) + "\n", encoding="utf-8")
    print(f"wrote {out} ({len(dates)} quarters, {len(HEADER) - 1} series)")


if __name__ == "__main__":
    main()
