"""Generate the synthetic demo data sets bundled with Volcast.

Every number written by this script is invented. The series belong to a fictional
asset manager, Harrowgate Lane Capital, and are simulated from small ARCH-family
models with fixed seeds, so running the script again reproduces the files byte for byte.

Usage, from the repository root:

    python demo_data/make_demo_data.py

The CSV files are written next to this script. Only NumPy is needed.

Returns are log returns in percent, r[t] = 100 * ln(level[t] / level[t-1]).
Levels are rounded to 4 decimals, returns to 6 decimals, dates are ISO YYYY-MM-DD.
"""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np

OUT_DIR = Path(__file__).resolve().parent

BURN_IN = 500  # simulated periods discarded before the first date


# ---------------------------------------------------------------------------
# calendars
# ---------------------------------------------------------------------------

def business_month_ends(first_month: str, last_month: str) -> np.ndarray:
    """Last Monday-to-Friday day of every month from first_month to last_month ('YYYY-MM')."""
    months = np.arange(np.datetime64(first_month, "M"), np.datetime64(last_month, "M") + 1)
    last_days = (months + 1).astype("datetime64[D]") - 1
    return np.busday_offset(last_days, 0, roll="backward")


def business_days(first_day: str, last_day: str) -> np.ndarray:
    """Every Monday-to-Friday day from first_day to last_day inclusive."""
    days = np.arange(np.datetime64(first_day, "D"), np.datetime64(last_day, "D") + 1)
    return days[np.is_busday(days)]


def window_mask(dates: np.ndarray, start: str, end: str) -> np.ndarray:
    """True for return dates inside [start, end]."""
    return (dates >= np.datetime64(start, "D")) & (dates <= np.datetime64(end, "D"))


# ---------------------------------------------------------------------------
# simulation
# ---------------------------------------------------------------------------

def std_t_shocks(rng: np.random.Generator, nu: float, n: int) -> np.ndarray:
    """Student-t draws rescaled to mean 0 and variance 1."""
    return rng.standard_t(nu, size=n) * np.sqrt((nu - 2.0) / nu)


def simulate_returns(
    rng: np.random.Generator,
    n: int,
    *,
    mu: float,
    phi: float,
    omega: float,
    alpha: float,
    gamma: float,
    beta: float,
    nu: float,
    stress: list[tuple[np.ndarray, float, float]] | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Simulate an AR(1)-GJR-GARCH(1,1) with standardised Student-t shocks.

        r[t]       = mu + phi * r[t-1] + e[t]
        e[t]       = sqrt(s2[t]) * z[t]
        s2[t]      = omega + (alpha + gamma * 1{e[t-1] < 0}) * e[t-1]^2 + beta * s2[t-1]

    gamma = 0 gives a plain GARCH(1,1); phi = 0 a constant mean.

    `stress` is a list of (mask, scale, shift) over the n kept periods: inside the
    mask the innovation becomes e[t] = scale * sqrt(s2[t]) * z[t] + shift, with shift
    in percent per period. A negative shift gives a cluster of large, mostly negative
    returns; the variance recursion sees those innovations and carries the raised
    volatility forward after the window closes.

    The first BURN_IN simulated periods are discarded. Returns (r, s2), both length n.
    """
    total = BURN_IN + n
    z = std_t_shocks(rng, nu, total)
    scale = np.ones(total)
    shift = np.zeros(total)
    for mask, k, m in stress or []:
        idx = BURN_IN + np.flatnonzero(mask)
        scale[idx] = k
        shift[idx] = m

    persistence = alpha + 0.5 * gamma + beta
    s2_prev = omega / (1.0 - persistence)  # start at the unconditional variance
    e_prev = 0.0
    r_prev = mu / (1.0 - phi)

    r = np.empty(total)
    s2 = np.empty(total)
    for t in range(total):
        neg = 1.0 if e_prev < 0.0 else 0.0
        s2_t = omega + (alpha + gamma * neg) * e_prev * e_prev + beta * s2_prev
        e_t = scale[t] * np.sqrt(s2_t) * z[t] + shift[t]
        r_t = mu + phi * r_prev + e_t
        r[t] = r_t
        s2[t] = s2_t
        e_prev, s2_prev, r_prev = e_t, s2_t, r_t
    return r[BURN_IN:], s2[BURN_IN:]


def levels_from_returns(start_level: float, returns_pct: np.ndarray) -> np.ndarray:
    """Level path, rounded to 4 decimals, starting at start_level on the first date."""
    log_path = np.concatenate([[0.0], np.cumsum(returns_pct / 100.0)])
    return np.round(start_level * np.exp(log_path), 4)


def returns_from_levels(levels: np.ndarray) -> np.ndarray:
    """Percent log returns of the (rounded) levels, rounded to 6 decimals."""
    return np.round(100.0 * np.diff(np.log(levels)), 6)


# ---------------------------------------------------------------------------
# output
# ---------------------------------------------------------------------------

def write_csv(name: str, header: tuple[str, str], dates: np.ndarray, values: np.ndarray, decimals: int) -> Path:
    path = OUT_DIR / name
    with path.open("w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh, lineterminator="\n")
        writer.writerow(header)
        for d, v in zip(dates, values):
            writer.writerow([str(d), f"{v:.{decimals}f}"])
    return path


# ---------------------------------------------------------------------------
# the three series
# ---------------------------------------------------------------------------

# 1. Global equity composite: monthly, AR(1)-GJR-GARCH(1,1), t(7).
#    Long-run innovation variance 20 (15.5% a year); persistence
#    alpha + gamma/2 + beta = 0.90; long-run mean mu / (1 - phi) = 0.6% a month.
EQUITY = dict(
    seed=19960113,
    first_month="1996-01",
    last_month="2026-10",
    start_level=1000.0,
    params=dict(mu=0.552, phi=0.08, omega=2.00, alpha=0.05, gamma=0.12, beta=0.79, nu=7.0),
    # (first date, last date, shock scale, shift in % per period)
    stress=[("2011-08-01", "2012-02-29", 1.3, -3.5)],  # crash
)

# 2. Commodity basket: business-daily, constant-mean GARCH(1,1), t(6).
#    Long-run daily variance 1.587 (20% a year); persistence 0.97.
COMMODITY = dict(
    seed=20161107,
    first_day="2016-11-01",
    last_day="2026-10-30",
    start_level=250.0,
    params=dict(mu=0.020, phi=0.0, omega=0.0476, alpha=0.06, gamma=0.0, beta=0.91, nu=6.0),
    stress=[
        ("2019-09-16", "2019-11-29", 1.2, -0.40),  # disorderly sell-off
        ("2023-04-03", "2023-05-12", 1.2, 0.30),  # supply-squeeze rally
    ],
)

# 3. Bond index: monthly, constant-mean GARCH(1,1), t(8).
#    Long-run monthly variance 2.08 (5% a year); persistence 0.90 (mild clustering).
BOND = dict(
    seed=20061115,
    first_month="2006-11",
    last_month="2026-10",
    start_level=100.0,
    params=dict(mu=0.30, phi=0.0, omega=0.208, alpha=0.07, gamma=0.0, beta=0.83, nu=8.0),
    stress=[("2017-02-01", "2017-07-31", 1.3, -1.0)],  # rate shock
)


# 4. The house funds: six monthly series over ten years, constant-mean GARCH(1,1) or
#    GJR-GARCH(1,1) with t shocks, one seed each; the small panel the command line's examples read
#    (returns, and the same funds as price levels starting at 100).
FUNDS_FIRST_MONTH, FUNDS_LAST_MONTH = "2016-10", "2026-10"
FUNDS = [
    # (column, seed, mu, omega, alpha, gamma, beta, nu)
    ("global_equity", 20161031, 0.55, 1.60, 0.06, 0.10, 0.80, 7.0),
    ("emerging_equity", 20161032, 0.60, 3.20, 0.08, 0.08, 0.78, 6.0),
    ("core_bond", 20161033, 0.25, 0.21, 0.07, 0.0, 0.83, 8.0),
    ("high_yield", 20161034, 0.45, 0.50, 0.10, 0.05, 0.78, 6.0),
    ("real_assets", 20161035, 0.40, 1.20, 0.06, 0.0, 0.84, 7.0),
    ("multi_strategy", 20161036, 0.35, 0.40, 0.05, 0.0, 0.85, 9.0),
]


def write_panel(name: str, dates: np.ndarray, columns: list, decimals: int) -> Path:
    """A wide panel: a date column and one column per fund."""
    path = OUT_DIR / name
    with path.open("w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh, lineterminator="\n")
        writer.writerow(["date"] + [c for c, _ in columns])
        for i, d in enumerate(dates):
            writer.writerow([str(d)] + [f"{v[i]:.{decimals}f}" for _, v in columns])
    return path


def _make(spec: dict, dates: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(spec["seed"])
    ret_dates = dates[1:]  # the first return belongs to the second date
    stress = [(window_mask(ret_dates, a, b), scale, shift) for a, b, scale, shift in spec["stress"]]
    r, _ = simulate_returns(rng, len(ret_dates), stress=stress, **spec["params"])
    levels = levels_from_returns(spec["start_level"], r)
    return levels, returns_from_levels(levels)


def main() -> list[Path]:
    written = []

    eq_dates = business_month_ends(EQUITY["first_month"], EQUITY["last_month"])
    eq_levels, eq_returns = _make(EQUITY, eq_dates)
    written.append(write_csv("equity_composite_monthly.csv", ("date", "level"), eq_dates, eq_levels, 4))
    written.append(write_csv("demo_returns.csv", ("date", "return"), eq_dates[1:], eq_returns, 6))

    cm_dates = business_days(COMMODITY["first_day"], COMMODITY["last_day"])
    cm_levels, _ = _make(COMMODITY, cm_dates)
    written.append(write_csv("commodity_basket_daily.csv", ("date", "level"), cm_dates, cm_levels, 4))

    bd_dates = business_month_ends(BOND["first_month"], BOND["last_month"])
    bd_levels, _ = _make(BOND, bd_dates)
    written.append(write_csv("bond_index_monthly.csv", ("date", "level"), bd_dates, bd_levels, 4))

    # the equity composite split for the examples of a first load and a monthly refresh
    written.append(write_csv("equity_history.csv", ("date", "level"), eq_dates[:-1], eq_levels[:-1], 4))
    written.append(write_csv("equity_new_levels.csv", ("date", "level"), eq_dates[-1:], eq_levels[-1:], 4))

    fd_dates = business_month_ends(FUNDS_FIRST_MONTH, FUNDS_LAST_MONTH)
    fund_levels, fund_returns = [], []
    for column, seed, mu, omega, alpha, gamma, beta, nu in FUNDS:
        rng = np.random.default_rng(seed)
        r, _ = simulate_returns(rng, len(fd_dates) - 1, mu=mu, phi=0.0, omega=omega, alpha=alpha, gamma=gamma,
                                beta=beta, nu=nu)
        levels = levels_from_returns(100.0, r)
        fund_levels.append((column, levels))
        fund_returns.append((column, returns_from_levels(levels)))
    written.append(write_panel("fund_returns_monthly.csv", fd_dates[1:], fund_returns, 6))
    written.append(write_panel("fund_prices_monthly.csv", fd_dates, fund_levels, 4))

    return written


if __name__ == "__main__":
    for p in main():
        print(f"wrote {p}")
