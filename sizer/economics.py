"""Cost of losses over a cable's life, and the helpers that justify an upsizing.

The present value of Joule losses follows the economic method of IEC 60287-3-2 (2012,
clause 4)::

    CJ = Imax² · R · l · F
    F  = Np · Nc · (T·P + D) · Q / (1 + i)
    Q  = Σ_{n=1..N} r^(n−1) = (1 − r^N) / (1 − r)        (Q = N when r = 1)
    r  = (1 + a)² · (1 + b) / (1 + i)
    T  = hours per year × ϑ                               (ϑ: loss load factor)

with a the yearly load growth, b the yearly energy price escalation, i the discount
rate, N the lifetime in years, P the energy price in money per W·h and D the demand
charge in money per W of peak loss per year. The standard writes a, b, i in percent;
here every rate is a **fraction** (0.07 for 7 %). sizer always sets Np·Nc = 1: callers
multiply F by the circuit's *total* peak loss in W (all phase conductors, all sets).

All functions are pure and broadcast over numpy arrays; scalars in give floats out.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import NoReturn

import numpy as np
import numpy.typing as npt

from sizer.errors import ScenarioError

FloatOrArray = float | npt.NDArray[np.float64]

HOURS_PER_YEAR = 8760.0
MONTHS_PER_YEAR = 12.0


def _out(value: npt.ArrayLike) -> FloatOrArray:
    """Return a float for a 0-d result, the array otherwise."""
    arr = np.asarray(value, dtype=float)
    return float(arr) if arr.ndim == 0 else arr


# --- load shape --------------------------------------------------------------------------


def loss_load_factor(load_factor: npt.ArrayLike) -> FloatOrArray:
    """Loss load factor ϑ (mean loss / peak loss) from the load factor LF (mean / peak load).

    Buller–Woodrow: ϑ = 0.3·LF + 0.7·LF². Any load curve has LF² ≤ ϑ ≤ LF (mean of the
    square of a value in [0, 1] lies between the square of its mean and its mean); the
    result is clipped to those bounds so rounding never breaks them.
    """
    lf = np.asarray(load_factor, dtype=float)
    if not np.all(np.isfinite(lf)) or np.any((lf < 0) | (lf > 1)):
        raise ScenarioError(f"a load factor lies between 0 and 1, got {load_factor!r}",
                            field="load_factor")
    theta = 0.3 * lf + 0.7 * lf * lf
    return _out(np.clip(theta, lf * lf, lf))


def annual_loss_kwh(
    peak_loss_w: npt.ArrayLike, loss_load_factor: npt.ArrayLike,
    hours_per_year: npt.ArrayLike = HOURS_PER_YEAR,
) -> FloatOrArray:
    """Energy lost in a year (kWh) from the peak loss (W): peak × hours × ϑ / 1000."""
    loss = (np.asarray(peak_loss_w, dtype=float) * np.asarray(loss_load_factor, dtype=float)
            * np.asarray(hours_per_year, dtype=float) / 1000.0)
    return _out(loss)


def demand_charge_per_w_year(per_kw_month: npt.ArrayLike) -> FloatOrArray:
    """Demand charge D of IEC 60287-3-2 (money per W·year) from a tariff per kW per month."""
    return _out(np.asarray(per_kw_month, dtype=float) * MONTHS_PER_YEAR / 1000.0)


# --- IEC 60287-3-2 factors ------------------------------------------------------------


def growth_ratio(
    load_growth: npt.ArrayLike, escalation: npt.ArrayLike, discount: npt.ArrayLike
) -> FloatOrArray:
    """Growth ratio r = (1 + a)²·(1 + b)/(1 + i), rates as fractions (IEC 60287-3-2 cl. 4).

    a: load growth per year (the loss grows with its square), b: energy price
    escalation per year, i: discount rate.
    """
    a = np.asarray(load_growth, dtype=float)
    b = np.asarray(escalation, dtype=float)
    i = np.asarray(discount, dtype=float)
    return _out((1.0 + a) ** 2 * (1.0 + b) / (1.0 + i))


def q_factor(r: npt.ArrayLike, years: npt.ArrayLike) -> FloatOrArray:
    """Q = Σ_{n=1..N} r^(n−1) = (1 − r^N)/(1 − r), and N when r = 1 (IEC 60287-3-2 cl. 4).

    Evaluated as expm1(N·log1p(r − 1))/(r − 1), which stays accurate as r → 1.
    """
    r_arr = np.asarray(r, dtype=float)
    n = np.asarray(years, dtype=float)
    d = r_arr - 1.0
    at_one = d == 0.0
    safe_d = np.where(at_one, 1.0, d)
    q = np.where(at_one, n, np.expm1(n * np.log1p(d)) / safe_d)
    return _out(q)


def annual_cost_per_w(
    energy_price_per_wh: npt.ArrayLike, demand_per_w_year: npt.ArrayLike,
    loss_load_factor: npt.ArrayLike, hours_per_year: npt.ArrayLike = HOURS_PER_YEAR,
) -> FloatOrArray:
    """First-year cost of 1 W of peak loss: T·P + D (money per W), T = hours × ϑ."""
    t_h = np.asarray(hours_per_year, dtype=float) * np.asarray(loss_load_factor, dtype=float)
    cost = t_h * np.asarray(energy_price_per_wh, dtype=float) + np.asarray(
        demand_per_w_year, dtype=float)
    return _out(cost)


def loss_pv_per_w(
    energy_price_per_wh: npt.ArrayLike,
    demand_per_w_year: npt.ArrayLike,
    loss_load_factor: npt.ArrayLike,
    hours_per_year: npt.ArrayLike,
    load_growth: npt.ArrayLike,
    escalation: npt.ArrayLike,
    discount: npt.ArrayLike,
    years: npt.ArrayLike,
) -> FloatOrArray:
    """F of IEC 60287-3-2 clause 4 with Np·Nc = 1: present value per W of peak loss.

    F = (T·P + D)·Q/(1 + i). Multiply by a circuit's total peak I²R loss in W to get the
    present value of its losses over ``years``, in the money of the prices given.
    """
    first_year = annual_cost_per_w(energy_price_per_wh, demand_per_w_year, loss_load_factor,
                                   hours_per_year)
    q = q_factor(growth_ratio(load_growth, escalation, discount), years)
    return _out(np.asarray(first_year) * np.asarray(q) / (1.0 + np.asarray(discount, float)))


# --- upsizing justification -----------------------------------------------------------


def simple_payback_years(added_cost: npt.ArrayLike, annual_saving: npt.ArrayLike) -> FloatOrArray:
    """Years for the first-year saving to repay the added cost, undiscounted.

    0 when nothing is added (or money is saved upfront); inf when there is no saving.
    """
    cost = np.asarray(added_cost, dtype=float)
    saving = np.asarray(annual_saving, dtype=float)
    safe = np.where(saving > 0, saving, 1.0)
    years = np.where(cost <= 0, 0.0, np.where(saving > 0, cost / safe, np.inf))
    return _out(years)


def npv(
    added_cost: npt.ArrayLike,
    annual_saving: npt.ArrayLike,
    escalation: npt.ArrayLike,
    discount: npt.ArrayLike,
    years: npt.ArrayLike,
    load_growth: npt.ArrayLike = 0.0,
) -> FloatOrArray:
    """Net present value of an upsizing: −added cost + Σ_{n=1..N} saving_n/(1 + i)^n.

    ``annual_saving`` is the first year's saving (end of year 1); it grows each year by
    (1 + load_growth)²·(1 + escalation), exactly as the loss cost inside F does, so
    ``npv(c, s·(T·P + D), b, i, N, a) == −c + s·F`` for a peak-loss saving of s watts.
    """
    r = growth_ratio(load_growth, escalation, discount)
    pv = (np.asarray(annual_saving, dtype=float) * np.asarray(q_factor(r, years))
          / (1.0 + np.asarray(discount, dtype=float)))
    return _out(pv - np.asarray(added_cost, dtype=float))


# --- IEC 60287-3-2 clause 5.1: economic current ranges ----------------------------------


def economic_current_bounds_a(
    installed_cost_per_m: npt.ArrayLike, r_ohm_per_m: npt.ArrayLike, loss_pv_per_w: float,
) -> tuple[npt.NDArray[np.float64], npt.NDArray[np.float64]]:
    """Lower and upper peak current (A) of each size's economic range, IEC 60287-3-2 cl. 5.1.

    Sizes ascend; ``installed_cost_per_m`` is CI per metre of ONE conductor and
    ``r_ohm_per_m`` its resistance per metre (at the mean operating temperature), so the
    currents are per conductor and F is per W with Np·Nc = 1. (Cost per metre of the
    whole circuit works too when R is the circuit's loss resistance, Np × R.)
    The boundary between sizes k and k + 1 is where their total costs are equal::

        I = sqrt((CI[k+1] − CI[k]) / (F · (R[k] − R[k+1])))

    Returns ``(lower, upper)``: lower[0] = 0, upper[-1] = inf, upper[k] = lower[k+1].
    A negative cost step gives a 0 A boundary. When the boundaries do not ascend, some
    size is never economic; ``economic_size_index`` answers the choice directly.
    """
    ci = np.asarray(installed_cost_per_m, dtype=float)
    r = np.asarray(r_ohm_per_m, dtype=float)
    if ci.ndim != 1 or ci.shape != r.shape or ci.size == 0:
        raise ScenarioError("installed cost and resistance must be equal-length 1-D arrays")
    if not (math.isfinite(loss_pv_per_w) and loss_pv_per_w > 0):
        raise ScenarioError(f"the loss present value per W must be positive, got {loss_pv_per_w}")
    if not (np.all(np.isfinite(ci)) and np.all(np.isfinite(r))):
        raise ScenarioError("installed cost and resistance must be finite for every size")
    d_cost = np.diff(ci)
    d_r = -np.diff(r)
    if np.any(d_r <= 0):
        raise ScenarioError("resistance must fall strictly from each size to the next")
    boundary = np.sqrt(np.maximum(d_cost, 0.0) / (loss_pv_per_w * d_r))
    lower = np.concatenate(([0.0], boundary))
    upper = np.concatenate((boundary, [np.inf]))
    return lower, upper


def economic_size_index(
    current_a: npt.ArrayLike, installed_cost_per_m: npt.ArrayLike,
    r_ohm_per_m: npt.ArrayLike, loss_pv_per_w: float,
) -> int | npt.NDArray[np.int64]:
    """Index of the size with the least total cost CI + I²·R·F per metre (IEC 60287-3-2 cl. 4).

    Same units as ``economic_current_bounds_a``; sizes with a NaN cost or resistance
    (not sold) are skipped; ties go to the smaller size. Broadcasts over ``current_a``.
    """
    ci = np.asarray(installed_cost_per_m, dtype=float)
    r = np.asarray(r_ohm_per_m, dtype=float)
    i = np.asarray(current_a, dtype=float)[..., np.newaxis]
    total = ci + i * i * r * loss_pv_per_w
    total = np.where(np.isnan(total), np.inf, total)
    if np.all(np.isinf(total)):
        raise ScenarioError("no size has both a cost and a resistance")
    idx = np.argmin(total, axis=-1)
    return int(idx) if idx.ndim == 0 else idx.astype(np.int64)


# --- the parameters of one scenario ----------------------------------------------------

# Where a bad value is reported: the scenario's own field names ([economics] table).
_FIELD = {
    "energy_price_per_wh": "energy_price", "demand_per_w_year": "demand_charge",
    "load_factor": "load_factor", "loss_load_factor": "loss_load_factor",
    "hours_per_year": "hours", "load_growth": "load_growth", "escalation": "escalation",
    "discount": "discount_rate", "years": "lifetime",
}


@dataclass(frozen=True, kw_only=True)
class EconomicParams:
    """The economic inputs of a scenario, SI-style: rates are fractions, not percents.

    ``loss_load_factor`` is derived from ``load_factor`` (Buller–Woodrow) when not given;
    after construction it is always a float. Validates itself; errors name the
    scenario's ``[economics]`` field.
    """

    energy_price_per_wh: float            # P, money per W·h (0.12 USD/kWh -> 0.00012)
    discount: float                       # i, fraction per year
    years: float                          # N, lifetime in years
    demand_per_w_year: float = 0.0        # D, money per W of peak loss per year
    load_factor: float | None = None      # mean / peak load
    loss_load_factor: float | None = None  # ϑ, mean / peak loss
    hours_per_year: float = HOURS_PER_YEAR
    load_growth: float = 0.0              # a, fraction per year
    escalation: float = 0.0               # b, fraction per year

    def __post_init__(self) -> None:
        for name in ("energy_price_per_wh", "discount", "years", "demand_per_w_year",
                     "hours_per_year", "load_growth", "escalation"):
            self._require_finite(name, getattr(self, name))
        if self.energy_price_per_wh < 0:
            self._fail("energy_price_per_wh", "must not be negative")
        if self.demand_per_w_year < 0:
            self._fail("demand_per_w_year", "must not be negative")
        if not 0 < self.hours_per_year <= 8784:
            self._fail("hours_per_year", f"must lie in (0, 8784] h, got {self.hours_per_year}")
        if self.years <= 0:
            self._fail("years", f"must be positive, got {self.years}")
        for name in ("discount", "load_growth", "escalation"):
            value = getattr(self, name)
            if not -1 < value < 1:
                self._fail(name, f"is a fraction per year (0.07 for 7 %), got {value}")
        lf, theta = self.load_factor, self.loss_load_factor
        if lf is not None:
            self._require_finite("load_factor", lf)
            if not 0 < lf <= 1:
                self._fail("load_factor", f"must lie in (0, 1], got {lf}")
        if theta is not None:
            self._require_finite("loss_load_factor", theta)
            if not 0 < theta <= 1:
                self._fail("loss_load_factor", f"must lie in (0, 1], got {theta}")
        if theta is None:
            if lf is None:
                self._fail("load_factor", "give the load factor (or the loss load factor)")
            object.__setattr__(self, "loss_load_factor", float(loss_load_factor(lf)))
        elif lf is not None and not (lf * lf * (1 - 1e-9) <= theta <= lf * (1 + 1e-9)):
            self._fail("loss_load_factor",
                       f"{theta} is impossible with load factor {lf}: any load curve has "
                       f"LF² = {lf * lf:.4g} ≤ loss load factor ≤ LF = {lf:.4g}")

    def _require_finite(self, name: str, value: object) -> None:
        if isinstance(value, bool) or not isinstance(value, int | float) \
                or not math.isfinite(value):
            self._fail(name, f"must be a finite number, got {value!r}")

    @staticmethod
    def _fail(name: str, message: str) -> NoReturn:
        raise ScenarioError(message, field=_FIELD[name])

    @property
    def theta(self) -> float:
        """The loss load factor ϑ as a float (always set after construction)."""
        assert self.loss_load_factor is not None
        return self.loss_load_factor

    @property
    def equivalent_hours(self) -> float:
        """T of IEC 60287-3-2: hours per year at peak loss (hours × ϑ)."""
        return self.hours_per_year * self.theta

    @property
    def growth_ratio(self) -> float:
        """The growth ratio r of IEC 60287-3-2."""
        return float(growth_ratio(self.load_growth, self.escalation, self.discount))

    @property
    def q(self) -> float:
        """Q of IEC 60287-3-2."""
        return float(q_factor(self.growth_ratio, self.years))

    @property
    def annual_cost_per_w(self) -> float:
        """First-year cost of 1 W of peak loss, T·P + D (money per W)."""
        return float(annual_cost_per_w(self.energy_price_per_wh, self.demand_per_w_year,
                                       self.theta, self.hours_per_year))

    @property
    def loss_pv_per_w(self) -> float:
        """F of IEC 60287-3-2 (Np·Nc = 1): present value of 1 W of peak loss (money per W)."""
        return float(loss_pv_per_w(self.energy_price_per_wh, self.demand_per_w_year, self.theta,
                                   self.hours_per_year, self.load_growth, self.escalation,
                                   self.discount, self.years))

    def annual_loss_kwh(self, peak_loss_w: npt.ArrayLike) -> FloatOrArray:
        """Energy lost in the first year (kWh) for a peak loss in W."""
        return annual_loss_kwh(peak_loss_w, self.theta, self.hours_per_year)

    def upsizing_npv(self, added_cost: npt.ArrayLike,
                     peak_loss_saving_w: npt.ArrayLike) -> FloatOrArray:
        """NPV of an upsizing that adds ``added_cost`` and cuts the peak loss by the given W."""
        saving = np.asarray(peak_loss_saving_w, dtype=float) * self.annual_cost_per_w
        return npv(added_cost, saving, self.escalation, self.discount, self.years,
                   self.load_growth)
