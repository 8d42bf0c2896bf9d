"""Open datasets for the reference checks, as plain numpy arrays."""

from __future__ import annotations

import numpy as np
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
