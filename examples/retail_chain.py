"""An invented chain of corner shops, "Lantern Lane Grocers", and its weekly unit sales.

Nothing here comes from real data: every number is drawn from the generator below. The
scenario has what real sales tables have: products that differ in level, trend and
seasonality; a winter-holiday bump; one shop closed for a week (missing values); and one
data-entry slip (a spike a hundred times too large).

>>> table = weekly_units(shops=2, products=3, years=2)
>>> sorted(table.column_names)
['product', 'shop', 'units', 'week']
>>> table.num_rows
624
"""

from __future__ import annotations

import numpy as np
import pyarrow as pa

WEEKS_PER_YEAR = 52
PRODUCT_NAMES = (
    "oat loaf",
    "rye loaf",
    "sea salt",
    "plum jam",
    "honey jar",
    "cocoa tin",
    "ginger beer",
    "iced tea",
    "lemonade",
    "soup mix",
    "porridge",
    "tea lights",
    "wrapping roll",
    "sun cream",
    "ice lolly",
    "firewood",
    "umbrella",
    "hot cider",
    "mince pie",
    "pumpkin",
)
SHOP_NAMES = (
    "Quayside",
    "Millbrook",
    "Old Market",
    "Fenwick",
    "Harbour End",
    "Larch Hill",
    "Saltmarsh",
    "Tanners Row",
    "Upper Green",
    "Willowby",
    "Cobble Cross",
    "North Pier",
)

# Where in the year each product peaks (week number), and how seasonal it is (0..1).
_PEAKS = np.array([10, 12, 30, 36, 44, 50, 28, 27, 29, 2, 4, 50, 50, 26, 29, 1, 46, 50, 51, 43])
_STRENGTHS = np.array(
    [
        0.05,
        0.05,
        0.3,
        0.2,
        0.2,
        0.5,
        0.6,
        0.7,
        0.7,
        0.5,
        0.5,
        0.6,
        0.9,
        0.9,
        0.9,
        0.9,
        0.4,
        0.8,
        0.95,
        0.8,
    ]
)

CLOSED_SHOP = 3  # Fenwick closed for one week: its rows for that week carry no units
CLOSED_WEEK = 70
SLIP_SHOP, SLIP_PRODUCT, SLIP_WEEK = 5, 0, 120  # a value typed with an extra zero


def _name(names: tuple[str, ...], i: int) -> str:
    """The i-th name; past the list, the names again with a number, so every key differs.

    >>> _name(SHOP_NAMES, 0), _name(SHOP_NAMES, len(SHOP_NAMES))
    ('Quayside', 'Quayside 2')
    """
    turn = i // len(names)
    return names[i % len(names)] + (f" {turn + 1}" if turn else "")


def weekly_units(shops: int = 12, products: int = 20, years: int = 6, seed: int = 7) -> pa.Table:
    """Weekly units per shop and product: columns shop, product, week (0, 1, ...), units.

    Units are NULL in the week the closed shop was shut; one row carries a data-entry slip.
    Past the 12 shop and 20 product names, the names come again with a number ("Quayside
    2"), so a larger chain still has one series per shop and product.

    >>> chain = weekly_units(shops=13, products=21, years=1)
    >>> len(set(zip(chain["shop"].to_pylist(), chain["product"].to_pylist()))) == 13 * 21
    True
    """
    rng = np.random.default_rng(seed)
    weeks = WEEKS_PER_YEAR * years
    t = np.arange(weeks)
    shop_col, product_col, week_col, unit_col = [], [], [], []
    for s in range(shops):
        shop_size = rng.uniform(0.6, 1.8)
        for p in range(products):
            level = rng.uniform(20, 200) * shop_size
            growth = rng.normal(0.002, 0.002)  # per week, on the log scale
            phase = 2 * np.pi * (t - _PEAKS[p % len(_PEAKS)]) / WEEKS_PER_YEAR
            strength = _STRENGTHS[p % len(_STRENGTHS)]
            seasonal = np.exp(strength * np.cos(phase))
            holiday = 1.0 + 0.35 * ((t % WEEKS_PER_YEAR) == 50)  # the week before the holiday
            noise = np.exp(rng.normal(0.0, 0.06, weeks))
            units = np.round(level * np.exp(growth * t) * seasonal * holiday * noise)
            units = np.maximum(units, 1.0)
            present = np.ones(weeks, dtype=bool)
            if s == CLOSED_SHOP and weeks > CLOSED_WEEK:
                present[CLOSED_WEEK] = False
            if (s, p) == (SLIP_SHOP, SLIP_PRODUCT) and weeks > SLIP_WEEK:
                units[SLIP_WEEK] *= 10
            shop_col += [_name(SHOP_NAMES, s)] * weeks
            product_col += [_name(PRODUCT_NAMES, p)] * weeks
            week_col.append(t)
            unit_col.append(np.where(present, units, np.nan))
    return pa.table(
        {
            "shop": pa.array(shop_col),
            "product": pa.array(product_col),
            "week": pa.array(np.concatenate(week_col), type=pa.int64()),
            "units": pa.array(np.concatenate(unit_col), from_pandas=True),
        }
    )


# The shops' week, in takings relative to an average day: busiest on Saturday, short hours on
# Sunday. And the Easter rush: the eight days before Easter Sunday sell this much more.
WEEKDAY_LIFT = {"monday": 0.85, "tuesday": 0.9, "wednesday": 0.95, "thursday": 1.0,
                "friday": 1.2, "saturday": 1.45, "sunday": 0.65}  # fmt: skip
EASTER_LIFT = 0.6
EASTER_DAYS = 8


def monthly_takings(shops: int = 12, years: int = 8, seed: int = 11) -> pa.Table:
    """Monthly takings per shop: columns shop, month (DATE, the first of the month), takings.

    Each month is the sum of its invented days, so months with more Saturdays take more and
    the days before Easter lift March or April (see ``WEEKDAY_LIFT``, ``EASTER_LIFT``):
    the calendar effects that ``calendar_effects := 'weekdays, easter'`` takes out.

    >>> table = monthly_takings(shops=2, years=2)
    >>> table.column_names, table.num_rows
    (['shop', 'month', 'takings'], 48)
    """
    from tidesplit.effects import easter_day

    rng = np.random.default_rng(seed)
    first = np.datetime64("2017-01-01", "D")
    days = np.arange(first, np.datetime64(f"{2017 + years}-01-01", "D"))
    day_numbers = days.astype(np.int64)
    weekday = (day_numbers + 3) % 7  # 0 is Monday (1970-01-01 was a Thursday)
    lift = np.array(list(WEEKDAY_LIFT.values()))[weekday]
    easter = np.array([easter_day(y) for y in range(2017, 2017 + years)])
    before_easter = ((day_numbers[:, None] >= easter - EASTER_DAYS)
                     & (day_numbers[:, None] < easter)).any(axis=1)  # fmt: skip
    lift = lift * (1.0 + EASTER_LIFT * before_easter)
    months = days.astype("datetime64[M]")
    month_index = (months - months[0]).astype(np.int64)
    day_of_year = (days - days.astype("datetime64[Y]")).astype(np.int64)
    shop_col, month_col, take_col = [], [], []
    for s in range(shops):
        level = rng.uniform(800, 3000)
        growth = rng.normal(0.0001, 0.00005)  # per day, on the log scale
        season = np.exp(0.25 * np.cos(2 * np.pi * (day_of_year - rng.integers(150, 350)) / 365.25))
        daily = level * np.exp(growth * np.arange(days.size)) * season * lift
        daily *= np.exp(rng.normal(0.0, 0.05, days.size))
        takings = np.bincount(month_index, weights=daily)
        shop_col += [_name(SHOP_NAMES, s)] * takings.size
        month_col.append(np.unique(months))
        take_col.append(np.round(takings, 2))
    return pa.table(
        {
            "shop": pa.array(shop_col),
            "month": pa.array(np.concatenate(month_col).astype("datetime64[D]")),
            "takings": pa.array(np.concatenate(take_col)),
        }
    )


# The chain's own days: on Founders' Day (14 March) the shops open only in the morning,
# and Lantern Night (the last Friday of October) brings the late crowds. A promotion day
# (a shop's own, about one day in twelve) sells this much more.
HOLIDAY_LIFT = {"founders_day": -0.45, "lantern_night": 0.5}
PROMOTION_LIFT = 0.3
PROMOTION_SHARE = 1 / 12


def chain_holidays(first_year: int = 2021, years: int = 3) -> pa.Table:
    """The chain's holidays as a table of ``day`` (DATE) and ``name``: what
    ``special_days := (SELECT list(struct_pack(day := day, name := name)) FROM ...)`` takes.

    >>> chain_holidays(2021, 1).to_pylist()[1]
    {'day': datetime.date(2021, 10, 29), 'name': 'lantern_night'}
    """
    days, names = [], []
    for year in range(first_year, first_year + years):
        days.append(np.datetime64(f"{year}-03-14"))
        names.append("founders_day")
        october_end = np.datetime64(f"{year}-10-31")
        weekday = (october_end.astype(np.int64) + 3) % 7  # 0 is Monday
        days.append(october_end - (weekday - 4) % 7)  # the last Friday
        names.append("lantern_night")
    return pa.table({"day": pa.array(np.array(days, dtype="datetime64[D]")), "name": names})


def daily_takings(shops: int = 8, years: int = 3, seed: int = 23) -> pa.Table:
    """Daily takings per shop: columns shop, day (DATE), takings and promotion (true on a
    shop's promotion days).

    Each day has the shops' week (``WEEKDAY_LIFT``), a yearly swing, the chain's holidays
    (``HOLIDAY_LIFT``, days from ``chain_holidays``) and the shop's promotions
    (``PROMOTION_LIFT``): what ``special_days`` and ``outside_columns := ['promotion']`` take
    out, on the log scale.

    >>> table = daily_takings(shops=2, years=1)
    >>> table.column_names, table.num_rows
    (['shop', 'day', 'takings', 'promotion'], 730)
    """
    rng = np.random.default_rng(seed)
    first_year = 2021
    days = np.arange(
        np.datetime64(f"{first_year}-01-01", "D"), np.datetime64(f"{first_year + years}-01-01", "D")
    )
    day_numbers = days.astype(np.int64)
    lift = np.array(list(WEEKDAY_LIFT.values()))[(day_numbers + 3) % 7]
    holidays = chain_holidays(first_year, years)
    holiday_days = holidays.column("day").to_numpy().astype("datetime64[D]")
    for day, name in zip(holiday_days, holidays.column("name").to_pylist(), strict=True):
        lift = lift * np.where(days == day, 1.0 + HOLIDAY_LIFT[name], 1.0)
    day_of_year = (days - days.astype("datetime64[Y]")).astype(np.int64)
    shop_col, day_col, take_col, promo_col = [], [], [], []
    for s in range(shops):
        level = rng.uniform(300, 900)
        season = np.exp(0.2 * np.cos(2 * np.pi * (day_of_year - rng.integers(150, 350)) / 365.25))
        promotion = rng.random(days.size) < PROMOTION_SHARE
        daily = level * season * lift * (1.0 + PROMOTION_LIFT * promotion)
        daily *= np.exp(rng.normal(0.0, 0.06, days.size))
        shop_col += [_name(SHOP_NAMES, s)] * days.size
        day_col.append(days)
        take_col.append(np.round(daily, 2))
        promo_col.append(promotion)
    return pa.table(
        {
            "shop": pa.array(shop_col),
            "day": pa.array(np.concatenate(day_col)),
            "takings": pa.array(np.concatenate(take_col)),
            "promotion": pa.array(np.concatenate(promo_col)),
        }
    )
