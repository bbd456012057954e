"""The study's transition state theory (TST) estimate, with the products it names.

An estimate takes one of two forms:

* a **named pair**: ``major``, ``minor`` and ``ddg`` = G‡(minor) − G‡(major), so that a positive
  ΔΔG‡ favours ``major``; it predicts the ratio major : minor = exp(ΔΔG‡ / RT) and, for the
  other order, its reciprocal;
* **one free-energy barrier per product** (each product's own transition state, measured from the
  same reactant): TST then predicts every product's share, k_i / Σ k_j with k_i ∝ exp(−ΔG‡_i / RT)
  (Eyring–Polanyi: the prefactor k_B·T/h is the same for every channel and cancels), and the ratio
  of any two of them.

Values are checked where they are stated (manifest, command line, window): non-finite numbers, a
temperature that is not a positive number of kelvin, and barrier differences beyond
:data:`MAX_DDG_KCAL` are refused with a sentence naming where the value came from.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Mapping, Sequence

from basinmark.core.errors import BasinmarkError
from basinmark.core.units import ENERGY_UNITS, convert_energy

#: Largest |ΔΔG‡| accepted, in kcal/mol.  At 298 K, 50 kcal/mol is a ratio of about 10³⁶: far beyond
#: anything a set of trajectories could test, so a larger value is almost surely a typing or unit
#: error (common practice, no source).
MAX_DDG_KCAL = 50.0


class TSTError(BasinmarkError):
    """A TST estimate is malformed or absurd (non-finite, too large, bad temperature or names)."""


def _unit(unit: object, where: str) -> str:
    for u in ENERGY_UNITS:
        if str(unit).lower() == u.lower():
            return u
    raise TSTError(f"{where}: unknown energy unit {unit!r}; use one of: {', '.join(ENERGY_UNITS)}")


def _number(value: object, what: str, where: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        try:
            value = float(value)  # type: ignore[arg-type]
        except (TypeError, ValueError):
            raise TSTError(f"{where}: {what} must be a number, got {value!r}") from None
    value = float(value)
    if not math.isfinite(value):
        raise TSTError(f"{where}: {what} must be a finite number, got {value}")
    return value


def check_temperature(value: object, where: str) -> float:
    t = _number(value, "the temperature", where)
    if not t > 0.0:
        raise TSTError(f"{where}: the temperature must be a positive number of kelvin, got {t:g}")
    return t


def check_ddg(value: object, unit: str, where: str, what: str = "ΔΔG‡") -> float:
    d = _number(value, what, where)
    kcal = float(convert_energy(d, unit, "kcal/mol"))
    if abs(kcal) > MAX_DDG_KCAL:
        raise TSTError(f"{where}: {what} = {d:g} {unit} is beyond ±{MAX_DDG_KCAL:g} kcal/mol, which no set of "
                       f"trajectories could test; check the value and its unit")
    return d


def _name(value: object, what: str, where: str) -> str:
    if not isinstance(value, str) or not value.strip():
        raise TSTError(f"{where}: {what} must name a product (a non-empty string), got {value!r}")
    return value.strip()


@dataclass(frozen=True)
class Experiment:
    """A measured product ratio ``a : b`` with its uncertainty (± ``uncertainty``, same scale)."""

    a: str
    b: str
    ratio: float
    uncertainty: float = 0.0
    source: str = ""

    def interval(self, a: str, b: str) -> tuple[float, float, float] | None:
        """``(ratio, lo, hi)`` for the order asked, or None when the experiment is about another pair."""
        lo, hi = max(self.ratio - self.uncertainty, 0.0), self.ratio + self.uncertainty
        if (a, b) == (self.a, self.b):
            return self.ratio, lo, hi
        if (a, b) == (self.b, self.a):
            inv = lambda x: math.inf if x == 0 else 1.0 / x  # noqa: E731
            return inv(self.ratio), inv(hi), inv(lo)
        return None

    def text(self) -> str:
        unc = f" ± {self.uncertainty:.3g}" if self.uncertainty else ""
        return f"{self.a} : {self.b} = {self.ratio:.3g}{unc}" + (f" ({self.source})" if self.source else "")


@dataclass(frozen=True)
class TSTEstimate:
    """A TST estimate: a named pair or per-product barriers, at one temperature, in one energy unit."""

    unit: str = "kcal/mol"
    temperature: float = 298.15
    major: str | None = None
    minor: str | None = None
    ddg: float | None = None  # G‡(minor) − G‡(major), in ``unit``
    barriers: Mapping[str, float] = field(default_factory=dict)  # ΔG‡ per product, in ``unit``
    source: str = ""  # where the numbers come from (free text of the study)
    origin: str = ""  # where the estimate was stated ("basinmark-set.toml", "the command line", ...)
    experiment: Experiment | None = None

    # --- construction -----------------------------------------------------------------------
    @classmethod
    def pair(cls, major: str, minor: str, ddg: float, unit: str = "kcal/mol", temperature: float = 298.15,
             *, source: str = "", origin: str = "", where: str | None = None,
             experiment: Experiment | None = None) -> "TSTEstimate":
        where = where or origin or "TST estimate"
        unit = _unit(unit, where)
        major, minor = _name(major, "major", where), _name(minor, "minor", where)
        if major == minor:
            raise TSTError(f"{where}: major and minor name the same product {major!r}; name two different products")
        return cls(unit=unit, temperature=check_temperature(temperature, where), major=major, minor=minor,
                   ddg=check_ddg(ddg, unit, where, f"ΔΔG‡ = G‡({minor}) − G‡({major})"), source=source,
                   origin=origin, experiment=experiment)

    @classmethod
    def from_barriers(cls, barriers: Mapping[str, float], unit: str = "kcal/mol", temperature: float = 298.15,
                      *, source: str = "", origin: str = "", where: str | None = None,
                      experiment: Experiment | None = None) -> "TSTEstimate":
        where = where or origin or "TST estimate"
        unit = _unit(unit, where)
        if not isinstance(barriers, Mapping) or len(barriers) < 2:
            raise TSTError(f"{where}: barriers must give at least two products, each with its ΔG‡")
        values = {_name(k, "a barrier", where): _number(v, f"the barrier of {k}", where) for k, v in barriers.items()}
        lowest = min(values, key=values.get)  # type: ignore[arg-type]
        for name, g in values.items():
            check_ddg(g - values[lowest], unit, where, f"the barrier difference G‡({name}) − G‡({lowest})")
        return cls(unit=unit, temperature=check_temperature(temperature, where), barriers=dict(values),
                   source=source, origin=origin, experiment=experiment)

    # --- what it predicts --------------------------------------------------------------------
    @property
    def is_pair(self) -> bool:
        return self.ddg is not None

    @property
    def products(self) -> list[str]:
        return [self.major, self.minor] if self.is_pair else list(self.barriers)  # type: ignore[list-item]

    def _rt(self) -> float:
        from basinmark.core.stats import _rt_joules_per_mole
        return _rt_joules_per_mole(self.temperature)

    def _joules(self, value: float) -> float:
        from basinmark.core.stats import _to_joules_per_mole
        return _to_joules_per_mole(value, self.unit)

    def ddg_for(self, a: str, b: str) -> float | None:
        """ΔΔG‡ = G‡(b) − G‡(a) in ``unit`` for the ratio a : b, or None when the estimate does not cover it."""
        if self.is_pair:
            if (a, b) == (self.major, self.minor):
                return self.ddg
            if (a, b) == (self.minor, self.major):
                return -self.ddg  # type: ignore[operator]
            return None
        if a in self.barriers and b in self.barriers and a != b:
            return self.barriers[b] - self.barriers[a]
        return None

    def ratio(self, a: str, b: str) -> float | None:
        """The ratio a : b = exp((G‡(b) − G‡(a)) / RT) that TST predicts, or None if not covered."""
        d = self.ddg_for(a, b)
        return None if d is None else math.exp(self._joules(d) / self._rt())

    def shares(self, products: Sequence[str] | None = None) -> dict[str, float]:
        """Each product's predicted share among the products with a barrier (Boltzmann over all of them).

        A pair estimate gives the shares of its two products alone.  ``products`` limits (and orders)
        the result to those named; products without a barrier are left out.
        """
        if self.is_pair:
            g = {self.major: 0.0, self.minor: self._joules(self.ddg)}  # type: ignore[dict-item]
        else:
            g = {k: self._joules(v) for k, v in self.barriers.items()}
        low = min(g.values())
        w = {k: math.exp(-(v - low) / self._rt()) for k, v in g.items()}  # shifted: no underflow of every term
        total = sum(w.values())
        names = [p for p in (products if products is not None else list(g)) if p in g]
        return {k: w[k] / total for k in names}

    # --- words -------------------------------------------------------------------------------
    def text(self) -> str:
        """The estimate in a phrase, e.g. "ΔΔG‡ = G‡(beta) − G‡(alpha) = 0.30 kcal/mol at 298.15 K"."""
        if self.is_pair:
            return (f"ΔΔG‡ = G‡({self.minor}) − G‡({self.major}) = {self.ddg:.2f} {self.unit} "
                    f"at {self.temperature:.2f} K")
        listed = ", ".join(f"{k} {v:.2f}" for k, v in self.barriers.items())
        return f"barriers ΔG‡ ({self.unit}) {listed} at {self.temperature:.2f} K"

    def check_products(self, products: Sequence[str]) -> None:
        """Refuse an estimate naming a product the rules do not have (the sentence says where it was stated)."""
        unknown = [p for p in self.products if p not in products]
        if self.experiment is not None:
            unknown += [p for p in (self.experiment.a, self.experiment.b) if p not in products and p not in unknown]
        if unknown:
            where = self.origin or "the TST estimate"
            raise TSTError(f"{where}: {', '.join(repr(u) for u in unknown)} "
                           f"{'is not a product' if len(unknown) == 1 else 'are not products'} of the rules; "
                           f"products are: {', '.join(products) or '(none)'}")


def unnamed_ddg_message(ddg: float, unit: str, where: str, products: Sequence[str]) -> str:
    """What to tell someone whose ΔΔG‡ does not say which product it favours."""
    listed = ", ".join(products) or "(none)"
    return (f"{where}: ΔΔG‡ = {ddg:g} {unit} does not say which product it favours, so it cannot be set beside a "
            f"ratio. Name the pair: major = \"…\" and minor = \"…\" under [tst] (ΔΔG‡ = G‡(minor) − G‡(major)), "
            f"or give one barrier per product under [tst.barriers]. Products of the rules: {listed}.")
