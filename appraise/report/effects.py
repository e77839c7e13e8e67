"""The plain effect of each coefficient: what it does to the price, with its unit.

A coefficient is read per term, with a step that suits the input:

* log response, a term in ``x``: one step of ``x`` changes the price by
  :math:`100\\,(e^{b s} - 1)` percent (``+0.40% per month``, ``-0.76% per year of
  age``, ``+5.3% per bathroom``); an indicator level by :math:`100\\,(e^{b} - 1)`
  percent against the reference level (Halvorsen and Palmquist 1980);
* log response, ``log(x)``: an elasticity, 1% more ``x`` changes the price by
  :math:`100\\,(1.01^{b} - 1)` percent;
* linear response: ``b s`` currency units per step (``$123 per sq ft``), and
  :math:`b \\ln 1.01` per 1% more of a logged input;
* a polynomial: the slope of all its powers at the median of the sales,
  :math:`\\sum_k k\\, b_k \\tilde x^{k-1}`, on its first line;
* a product ``a * b``: how the effect of a step of ``b`` changes for each step
  of ``a``: :math:`100\\,(e^{b\\, s_a s_b} - 1)` percent.

Steps: 100 sq ft (10 m²) of living area and 1,000 sq ft (100 m²) of lot for a
log response, one sq ft (m²) for a linear one; one km, month, year of age,
bedroom or bathroom. Anything not recognised is read per unit of the term, with
enough digits that a small effect never prints as ``0.00%``.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from typing import Any

from .labels import area_unit_label, field_label
from .numbers import money_rate, plain, signed_percent

_NAME = r"(?:[A-Za-z_][A-Za-z0-9_.]*|`[^`]+`)"
_BARE = re.compile(rf"^{_NAME}$")
_LOG = re.compile(rf"^log\(({_NAME})\)$")
_HINGE = re.compile(rf"^hinge\(({_NAME}),\s*(-?[0-9.]+)\)$")
_PRODUCT = re.compile(rf"^({_NAME}) \* ({_NAME})$")
_POWER = re.compile(rf"^({_NAME})(?:\^(\d+))?$")


@dataclass(frozen=True)
class Step:
    """A step of an input: its size in the input's own unit and how it is said."""

    size: float
    text: str


@dataclass(frozen=True)
class Effect:
    """The plain effect of one coefficient.

    ``value`` is the number shown (a percent for a log response, currency units
    for a linear one) and ``unit`` what it is per (``"% per month"``); both are
    empty for the intercept and for a term without an estimate.
    """

    term: str
    text: str
    value: float | None
    unit: str


def coefficient_effects(fit: Any, currency: str = "$") -> tuple[Effect, ...]:
    """One :class:`Effect` per row of ``fit.terms``, in the same order."""
    reader = _Reader(fit, currency)
    return tuple(reader.effect(t) for t in fit.terms)


class _Reader:
    def __init__(self, fit: Any, currency: str) -> None:
        self.fit = fit
        self.currency = currency
        self.log = fit.spec.response == "log"
        self.coef = {t.name: float(t.coef) for t in fit.terms if t.note is None}
        self.group_of = {c: g for g in fit.design.groups for c in g.columns}
        self.names = list(fit.design.names)

    # --- steps ---------------------------------------------------------------------
    def role_of(self, name: str) -> str | None:
        from ..engine.roles import ROLES

        bare = name.strip("`")
        if bare in ROLES:
            return bare
        roles = self.fit.sales.roles
        for role, header in roles.columns.items():
            if header == bare:
                return role
        return None

    def step(self, name: str) -> Step:
        role = self.role_of(name)
        unit = area_unit_label(getattr(self.fit.sales, "area_unit", "ft2"))
        metric = unit == "m²"
        if role == "living_area":
            if not self.log:
                return Step(1.0, unit)
            return Step(10.0, "10 m²") if metric else Step(100.0, "100 sq ft")
        if role == "lot_area":
            if not self.log:
                return Step(1.0, unit)
            return Step(100.0, "100 m²") if metric else Step(1000.0, "1,000 sq ft")
        if role in ("bedrooms", "bathrooms"):
            return Step(1.0, role[:-1])
        if role == "year_built":
            return Step(1.0, "year later built")
        if role in ("latitude", "longitude"):
            return Step(0.01, f"0.01 degree of {role}")
        bare = name.strip("`")
        definition = str((self.fit.spec.derived or {}).get(bare, ""))
        if "distance_km(" in definition or bare.endswith("_km") or bare == "km":
            return Step(1.0, "km")
        if "months_between(" in definition or bare in ("months", "month"):
            return Step(1.0, "month")
        if "years_between(" in definition and "age" not in bare:
            return Step(1.0, "year")
        if bare == "age" or bare.endswith("_age") or re.search(r"-\s*year_built", definition):
            return Step(1.0, "year of age")
        if role is not None:
            return Step(1.0, f"unit of {field_label(role).lower()}")
        return Step(1.0, f"unit of {bare}")

    def change(self, log_points: float) -> tuple[float, str]:
        """The change of price for a change of the linear predictor (percent or money)."""
        if self.log:
            pct = 100.0 * math.expm1(log_points)
            return pct, signed_percent(pct)
        return log_points, self.signed_money(log_points)

    def signed_money(self, amount: float) -> str:
        text = money_rate(amount, self.currency)
        return text if text.startswith("-") else "+" + text

    def effect(self, t: Any) -> Effect:
        if t.name == "Intercept" or t.note is not None or not math.isfinite(float(t.coef)):
            return Effect(t.name, "", None, "")
        b = float(t.coef)
        group = self.group_of.get(t.name)
        kind = getattr(group, "kind", "plain")
        expr = getattr(group, "expression", t.name)
        sign = "%" if self.log else self.currency
        if kind == "onehot":
            value, text = self.change(b)
            ref = plain(group.reference)
            return Effect(t.name, f"{text} vs {ref}", value, f"{sign} vs {ref}")
        if kind == "onehot_product":
            return self._level_slope(t.name, b, group)
        if kind == "poly":
            return self._poly(t.name, group)
        m = _BARE.match(expr)
        if m:
            s = self.step(expr)
            value, text = self.change(b * s.size)
            partner = self.partner_in_product(expr)
            at = f" at zero {self._what(partner)}" if partner else ""
            return Effect(t.name, f"{text} per {s.text}{at}", value, f"{sign} per {s.text}")
        m = _LOG.match(expr)
        if m:
            what = self._what(m.group(1))
            if self.log:
                pct = 100.0 * (1.01**b - 1.0)
                return Effect(
                    t.name,
                    f"{signed_percent(pct)} per 1% more {what}",
                    pct,
                    f"% per 1% more {what}",
                )
            amount = b * math.log(1.01)
            return Effect(
                t.name,
                f"{self.signed_money(amount)} per 1% more {what}",
                amount,
                f"{sign} per 1% more {what}",
            )
        m = _HINGE.match(expr)
        if m:
            s = self.step(m.group(1))
            knot = m.group(2)
            value, text = self.change(b * s.size)
            unit = f"per {s.text} beyond {knot}"
            return Effect(t.name, f"{text} {unit}", value, f"{sign} {unit}")
        m = _PRODUCT.match(expr)
        if m:
            sa, sb = self.step(m.group(1)), self.step(m.group(2))
            value, text = self.change(b * sa.size * sb.size)
            unit = f"per {sb.text} for each {sa.text} more"
            return Effect(t.name, f"{text} {unit}", value, f"{sign} {unit}")
        value, text = self.change(b)
        return Effect(t.name, f"{text} per unit of {expr}", value, f"{sign} per unit of {expr}")

    def partner_in_product(self, name: str) -> str | None:
        """The other input of a product term ``a * b`` that contains ``name``: the
        main term's own effect holds where that input is zero."""
        for g in self.fit.design.groups:
            m = _PRODUCT.match(g.expression)
            if m and name in (m.group(1), m.group(2)):
                return m.group(2) if m.group(1) == name else m.group(1)
        return None

    def _what(self, name: str) -> str:
        role = self.role_of(name)
        return field_label(role).lower() if role else name.strip("`")

    def _level_slope(self, column: str, b: float, group: Any) -> Effect:
        factor, _, rest = column.partition(" * ")
        level = rest[rest.find("[") + 1 : -1] if "[" in rest else rest
        s = self.step(factor)
        value, text = self.change(b * s.size)
        ref = plain(group.reference)
        unit = f"per {s.text} in {level} vs {ref}"
        sign = "%" if self.log else self.currency
        return Effect(column, f"{text} {unit}", value, f"{sign} {unit}")

    def _poly(self, column: str, group: Any) -> Effect:
        """Slope of all the powers of a one-input polynomial at the sales' median."""
        powers: dict[int, str] = {}
        base = None
        for c in group.columns:
            m = _POWER.match(c)
            if m is None:
                return Effect(column, "see the terms together", None, "")
            base = base or m.group(1)
            if m.group(1) != base:
                return Effect(column, "see the terms together", None, "")
            powers[int(m.group(2) or 1)] = c
        if column != powers.get(1):
            return Effect(column, f"with {base} (curvature)", None, "")
        x = self.fit.design_median(column)
        slope = sum(k * self.coef.get(c, 0.0) * x ** (k - 1) for k, c in powers.items())
        s = self.step(base)
        value, text = self.change(slope * s.size)
        unit = f"per {s.text} at {plain(round(x, 2))}"
        sign = "%" if self.log else self.currency
        return Effect(column, f"{text} {unit}", value, f"{sign} {unit}")
