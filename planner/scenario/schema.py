"""The scenario schema: what a scenario file may say, with units and signs.

Every input form (YAML today; spreadsheets and CSV folders through the same
dicts) is validated here, strictly: unknown keys are refused, numbers must be
finite, and the validated objects are frozen.  Cross-references (usage naming
a resource, duplicate names) are checked in :mod:`planner.validate`, which
collects every problem in one pass.

Money is in the scenario's ``currency`` (any text, default ``"$"``), volumes
in each product's ``unit`` (default ``"units"``), capacities in each
resource's ``unit``.  All amounts are for one planning period (a quarter by
default, ``period`` names it).
"""

from __future__ import annotations

from typing import Annotated, Literal, Union

from pydantic import AfterValidator, BaseModel, BeforeValidator, ConfigDict, Discriminator, Field, Tag

from pydantic_core import PydanticCustomError

from planner.scenario.numbers import MAX_MAGNITUDE, MIN_MAGNITUDE, Unusable, read_number, size_problem

__all__ = ["MAX_MAGNITUDE", "MIN_MAGNITUDE", "PER_PERIOD_TAGS"]


def _finite(x: float) -> float:
    why = size_problem(x)
    if why:
        raise ValueError(why)
    return x


def _as_number(x: object) -> object:
    """The number rule (:mod:`planner.scenario.numbers`) before pydantic sees the value.

    Numbers pass; plain decimal text is read; anything else is refused here, so
    pydantic never parses text by rules of its own (``"1_000"``, ``"infinity"``).
    """
    if isinstance(x, bool):  # pydantic would read true as 1.0
        raise ValueError("must be a number, not true/false")
    if isinstance(x, (int, float)):
        return x
    if isinstance(x, Unusable):  # reported by the validator where it stands, with its line
        raise PydanticCustomError("unusable", "cannot be used as written")
    value, message, fix = read_number(x)
    if value is not None:
        return value
    if isinstance(x, str) and message.startswith(("must be a plain decimal", "must be a finite")):
        raise PydanticCustomError("number_rule", "{message}", {"message": message, "fix": fix})
    if isinstance(x, str):  # explained by the validator, with the units stated for this amount
        raise PydanticCustomError("float_parsing", "must be a number")
    return x  # pydantic's own error: empty, true/false, a list ...


def _as_count(x: object) -> object:
    value = _as_number(x)
    if isinstance(value, float):
        why = size_problem(value)
        if why:
            raise ValueError(why)
        if not value.is_integer():
            raise ValueError("must be a whole number")
        return int(value)
    return value


Number = Annotated[float, BeforeValidator(_as_number), AfterValidator(_finite)]
NonNegative = Annotated[float, BeforeValidator(_as_number), AfterValidator(_finite), Field(ge=0)]
Positive = Annotated[float, BeforeValidator(_as_number), AfterValidator(_finite), Field(gt=0)]
Fraction = Annotated[float, BeforeValidator(_as_number), AfterValidator(_finite), Field(ge=-1.0, le=1.0)]
"""A number from -1 to 1 (a correlation)."""
Count = Annotated[int, BeforeValidator(_as_count), Field(ge=0, le=int(MAX_MAGNITUDE))]
"""A whole number >= 0 (a count of observations)."""
Name = Annotated[str, Field(min_length=1, max_length=200)]

#: The two forms of a per-period value (tags of its union, left out of problem locations).
PER_PERIOD_TAGS = ("one", "each")
PerPeriod = Annotated[Union[Annotated[NonNegative, Tag("one")], Annotated[list[NonNegative], Tag("each")]],
                      Discriminator(lambda v: "each" if isinstance(v, (list, tuple)) else "one")]
"""A number ≥ 0 for every period, or (with the scenario's ``periods``) one number ≥ 0 per period, in order."""


class _Strict(BaseModel):
    # use_attribute_docstrings: each field's docstring is its description (the workbook's notes read it)
    model_config = ConfigDict(extra="forbid", frozen=True, str_strip_whitespace=True, use_attribute_docstrings=True)


class DemandFit(_Strict):
    """Uncertainty of a price–demand line fitted from sales history (kept for risk analysis).

    Written by ``planner fit-demand``; the line itself is in price_intercept / price_slope.
    """

    intercept_se: NonNegative
    """Standard error of the fitted intercept (currency/unit)."""
    slope_se: NonNegative
    """Standard error of the fitted slope (currency/unit²)."""
    covariance: Number = 0.0
    """Covariance of the intercept and slope estimates (currency²/unit³)."""
    n: Count = 0
    """Number of observations."""
    r2: Number | None = None
    """Coefficient of determination of the fit (0..1)."""
    price_min: Number | None = None
    """Lowest price observed (currency/unit)."""
    price_max: Number | None = None
    """Highest price observed (currency/unit)."""
    source: str = ""
    """Where the history came from (file name)."""


class Product(_Strict):
    """One product: its price–demand line, costs, limits and routing."""

    name: Name
    """Unique name, used in every report and in ``usage`` keys of options."""
    price_intercept: PerPeriod
    """Price at which demand falls to zero (currency per unit)."""
    price_slope: PerPeriod = 0.0
    """Price drop per extra unit sold (currency per unit²); 0 means a fixed price."""
    unit_cost: PerPeriod
    """Variable cost per unit made (currency per unit)."""
    fixed_cost: NonNegative = 0.0
    """Cost per period avoided only by shutting the product down (currency)."""
    max_volume: PerPeriod | None = None
    """Market or contract cap on volume (units per period); none if omitted."""
    min_volume: PerPeriod = 0.0
    """Committed volume that must be made (units per period); > 0 forces it to run."""
    min_run: NonNegative = 0.0
    """Smallest volume worth setting up for when the product runs (units); it may still be shut down."""
    must_run: bool = False
    """True if the product may not be shut down this period (its fixed cost is then unavoidable)."""
    usage: dict[Name, NonNegative] = Field(default_factory=dict)
    """Amount of each resource used per unit made (resource unit per product unit)."""
    buy_cost: NonNegative | None = None
    """Cost of one unit bought in or subcontracted instead of made (currency per unit); needed with buy_max."""
    buy_max: NonNegative = 0.0
    """Most units that may be bought in per period (units; 0: none).  Bought units use no resource and are
    sold like made units: min_volume, max_volume and min_run count sales, and buying needs the product to
    run (its fixed_cost belongs to selling it)."""
    unit: str = "units"
    """Unit in which volumes are counted (text, for reports)."""
    description: str = ""
    demand_fit: DemandFit | None = None
    """Uncertainty of the line when it was fitted from history (see ``planner fit-demand``)."""
    setup_cost: PerPeriod = 0.0
    """With ``periods``: cost paid in each period in which the product is made (currency per period)."""
    setup_time: dict[Name, NonNegative] = Field(default_factory=dict)
    """With ``periods``: capacity of each named resource used in each period in which the product is made
    (resource units per period)."""
    holding_cost: PerPeriod = 0.0
    """With ``periods``: cost per unit in stock at the end of a period (currency per unit per period)."""
    initial_stock: NonNegative = 0.0
    """With ``periods``: units on hand at the start of the first period (may be sold even if it does not run)."""
    final_stock: NonNegative = 0.0
    """With ``periods``: at least this many units in stock at the end of the last period (units)."""
    stock_usage: dict[Name, NonNegative] = Field(default_factory=dict)
    """With ``periods``: amount of each named resource used per unit in stock at a period's end
    (resource unit per product unit)."""


class Resource(_Strict):
    """A shared limit: a work centre's hours or a material's supply."""

    name: Name
    capacity: PerPeriod
    """Amount available in the period (in ``unit``); with ``periods``, a number or one per period."""
    unit: str = ""
    """Unit of the capacity: h, kg, m² ... (text, for reports and unit checks)."""
    kind: Literal["work_centre", "material", "other"] = "other"
    description: str = ""
    fixed_cost: NonNegative = 0.0
    """The resource's own fixed cost for the period (currency): crew, lease; paid while it is open."""
    closable: bool = False
    """True if the resource may be closed for the period: closing saves fixed_cost and its capacity is then 0."""


class ProductGroup(_Strict):
    """Products sharing one fixed cost (a line, a family, a tooling set): paid if any member runs."""

    name: Name
    """Unique name of the group, shown in every report."""
    products: list[Name] = Field(min_length=1)
    """Names of the member products; a product may belong to several groups."""
    fixed_cost: NonNegative = 0.0
    """Paid if any member runs, avoided only if every member stops (currency per period)."""


class Option(_Strict):
    """A way to add capacity for a cost: a shift, overtime, premium material.

    Either ``adds`` with ``cost`` (all or nothing, e.g. a whole extra shift) or
    ``adds_up_to`` with ``cost_per_unit`` (usable in part, e.g. overtime hours).
    """

    name: Name
    adds: dict[Name, Positive] | None = None
    """Amounts added to each named resource if the option is taken (all or nothing)."""
    cost: NonNegative | None = None
    """Cost of the whole option for the period (currency)."""
    adds_up_to: dict[Name, Positive] | None = None
    """Largest amounts that may be added to each named resource (usable in part)."""
    cost_per_unit: NonNegative | None = None
    """Cost per unit added (currency per resource unit); with several resources, per unit of the option's scale 0..1 times each amount."""
    description: str = ""


class Uncertainty(_Strict):
    """A distribution for one uncertain number of the scenario (for Monte Carlo risk).

    ``product`` with field price_intercept / price_slope / unit_cost, or
    ``resource`` with field capacity.  normal: ``sd`` (and optional ``mean``,
    default the scenario's value); triangular: ``low``, ``mode``, ``high``;
    uniform: ``low``, ``high``; fitted: the product's ``demand_fit`` covariance
    of intercept and slope (field is then price_intercept, both move together).
    """

    product: Name | None = None
    resource: Name | None = None
    field: Literal["price_intercept", "price_slope", "unit_cost", "capacity"]
    distribution: Literal["normal", "triangular", "uniform", "fitted"]
    sd: NonNegative | None = None
    mean: Number | None = None
    low: Number | None = None
    mode: Number | None = None
    high: Number | None = None


class Correlation(_Strict):
    """Correlation between two products' demand (their intercepts' draws), -1..1."""

    products: tuple[Name, Name]
    rho: Fraction


#: The numbers a variant's change may address, by what it names (the same product/resource + field
#: addressing as ``uncertainty``; ``option`` and ``plant`` besides).
CHANGE_FIELDS: dict[str, tuple[str, ...]] = {
    "product": ("price_intercept", "price_slope", "unit_cost", "fixed_cost", "max_volume", "min_volume", "min_run"),
    "resource": ("capacity",),
    "option": ("taken",),
    "plant": ("plant_fixed_cost",),
}


class Change(_Strict):
    """One change of a variant: one number of a product, a resource, an option or the plant.

    Exactly one target: ``product`` (field price_intercept, price_slope, unit_cost, fixed_cost,
    max_volume, min_volume or min_run), ``resource`` (field capacity), ``option`` (field taken: the
    share of the option taken, 0 to 1, an all-or-nothing option 0 or 1; its amounts times the share
    are added to the capacities and its cost times the share to the plant-wide fixed cost) or
    ``plant: true`` (field plant_fixed_cost).  Exactly one of ``set`` (the new value), ``add`` (added
    to the value, in its unit; negative lowers it) or ``scale`` (the value times this factor).
    """

    product: Name | None = None
    """Product whose number changes (a name under products)."""
    resource: Name | None = None
    """Resource whose capacity changes (a name under resources)."""
    option: Name | None = None
    """Capacity option taken (a name under options): field taken."""
    plant: bool | None = None
    """true for the plant-wide number (field plant_fixed_cost)."""
    field: Literal["price_intercept", "price_slope", "unit_cost", "fixed_cost", "max_volume", "min_volume",
                   "min_run", "capacity", "taken", "plant_fixed_cost"]
    """Which number changes (in the unit of that number)."""
    set: Number | None = None
    """The new value (in the number's own unit)."""
    add: Number | None = None
    """Amount added to the value (in its unit; negative lowers it)."""
    scale: NonNegative | None = None
    """Factor the value is multiplied by (0.95: 5 % less)."""


class Variant(_Strict):
    """A named what-if: the scenario with a few numbers changed (planned beside it by ``planner compare``)."""

    name: Name
    """Unique name of the variant, shown in the comparison."""
    description: str = ""
    changes: list[Change] = Field(min_length=1)
    """The changes, applied in order to the scenario as written."""


class Scenario(_Strict):
    """A whole planning scenario for one period."""

    name: Name
    currency: str = "$"
    period: str = "quarter"
    plant_fixed_cost: NonNegative = 0.0
    """Fixed cost no decision avoids (currency per period); subtracted from total profit."""
    description: str = ""
    products: list[Product] = Field(min_length=1)
    resources: list[Resource] = Field(default_factory=list)
    options: list[Option] = Field(default_factory=list)
    product_groups: list[ProductGroup] = Field(default_factory=list)
    uncertainty: list[Uncertainty] = Field(default_factory=list)
    correlations: list[Correlation] = Field(default_factory=list)
    variants: list[Variant] = Field(default_factory=list)
    periods: list[Name] | None = None
    """Names of the planning periods, in order (e.g. months); omitted: one period (``period``)."""

    def product(self, name: str) -> Product:
        """The product called ``name`` (KeyError if none)."""
        for p in self.products:
            if p.name == name:
                return p
        raise KeyError(name)

    def resource(self, name: str) -> Resource:
        """The resource called ``name`` (KeyError if none)."""
        for r in self.resources:
            if r.name == name:
                return r
        raise KeyError(name)

    def variant(self, name: str) -> Variant:
        """The variant called ``name`` (KeyError if none)."""
        for v in self.variants:
            if v.name == name:
                return v
        raise KeyError(name)
