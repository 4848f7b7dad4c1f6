"""NIST StRD nonlinear regression: reading the certified files and the models as gammadot models.

Source: NIST/ITL Statistical Reference Datasets, nonlinear regression
(https://www.itl.nist.gov/div898/strd/nls/nls_main.shtml), the public-domain ``.dat`` files as
distributed in lmfit-py's ``NIST_STRD/`` folder (copies in ``tests/data/nist-strd/``). Each
model below is written from the equation in its file's header, with its analytic Jacobian,
as an ordinary :class:`gammadot.Model` record (unbounded parameters), so the tests run the same
engine code path a flow model uses (``gammadot.least_squares.fit_curve``) in linear space.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from gammadot import Model, ModelParameter

DATA = Path(__file__).parent / "data" / "nist-strd"
_PARAMETER_LINE = re.compile(r"^\s*(b\d+)\s*=\s*(\S+)\s+(\S+)\s+(\S+)\s+(\S+)\s*$")


@dataclass(frozen=True)
class Certified:
    """One NIST dataset: data, the two starting points, certified values and SDs."""

    name: str
    x: np.ndarray
    y: np.ndarray
    names: tuple[str, ...]
    starts: tuple[dict[str, float], dict[str, float]]
    values: dict[str, float]
    sds: dict[str, float]
    rss: float


def read(name: str) -> Certified:
    """Parse ``tests/data/nist-strd/<name>.dat`` (layout in the file's own header)."""
    lines = (DATA / f"{name}.dat").read_text(encoding="ascii").splitlines()
    params = [m.groups() for m in map(_PARAMETER_LINE.match, lines[30:60]) if m]
    rss = next(float(line.split(":")[1]) for line in lines if line.startswith("Residual Sum of Squares"))
    data_start = max(i for i, line in enumerate(lines) if line.startswith("Data:")) + 1
    table = np.array([[float(v) for v in line.split()] for line in lines[data_start:] if line.strip()])
    names = tuple(p[0] for p in params)
    return Certified(name, table[:, 1], table[:, 0], names,
                     ({p[0]: float(p[1]) for p in params}, {p[0]: float(p[2]) for p in params}),
                     {p[0]: float(p[3]) for p in params}, {p[0]: float(p[4]) for p in params}, rss)


def log_relative_error(estimate: float, certified: float) -> float:
    """LRE = −log10(|estimate − certified|/|certified|): correct significant digits
    (McCullough, Am. Stat. 52 (1998) 358, the usual StRD score); 15 for an exact match."""
    if estimate == certified:
        return 15.0
    return -math.log10(abs(estimate - certified) / abs(certified))


# ------------------------------------------------------------------------------- the models

def _misra1a(x, b1, b2):
    return b1 * (1 - np.exp(-b2 * x))


def _misra1a_jac(x, b1, b2):
    e = np.exp(-b2 * x)
    return {"b1": 1 - e, "b2": b1 * x * e}


def _chwirut(x, b1, b2, b3):
    return np.exp(-b1 * x) / (b2 + b3 * x)


def _chwirut_jac(x, b1, b2, b3):
    d = b2 + b3 * x
    f = np.exp(-b1 * x) / d
    return {"b1": -x * f, "b2": -f / d, "b3": -x * f / d}


def _danwood(x, b1, b2):
    return b1 * x ** b2


def _danwood_jac(x, b1, b2):
    return {"b1": x ** b2, "b2": b1 * x ** b2 * np.log(x)}


def _misra1b(x, b1, b2):
    return b1 * (1 - (1 + b2 * x / 2) ** -2)


def _misra1b_jac(x, b1, b2):
    return {"b1": 1 - (1 + b2 * x / 2) ** -2, "b2": b1 * x * (1 + b2 * x / 2) ** -3}


def _misra1c(x, b1, b2):
    return b1 * (1 - (1 + 2 * b2 * x) ** -0.5)


def _misra1c_jac(x, b1, b2):
    return {"b1": 1 - (1 + 2 * b2 * x) ** -0.5, "b2": b1 * x * (1 + 2 * b2 * x) ** -1.5}


def _misra1d(x, b1, b2):
    return b1 * b2 * x / (1 + b2 * x)


def _misra1d_jac(x, b1, b2):
    return {"b1": b2 * x / (1 + b2 * x), "b2": b1 * x / (1 + b2 * x) ** 2}


def _kirby2(x, b1, b2, b3, b4, b5):
    return (b1 + b2 * x + b3 * x ** 2) / (1 + b4 * x + b5 * x ** 2)


def _kirby2_jac(x, b1, b2, b3, b4, b5):
    num, den = b1 + b2 * x + b3 * x ** 2, 1 + b4 * x + b5 * x ** 2
    return {"b1": 1 / den, "b2": x / den, "b3": x ** 2 / den,
            "b4": -num * x / den ** 2, "b5": -num * x ** 2 / den ** 2}


def _cubic_ratio(x, b1, b2, b3, b4, b5, b6, b7):
    return (b1 + b2 * x + b3 * x ** 2 + b4 * x ** 3) / (1 + b5 * x + b6 * x ** 2 + b7 * x ** 3)


def _cubic_ratio_jac(x, b1, b2, b3, b4, b5, b6, b7):
    num = b1 + b2 * x + b3 * x ** 2 + b4 * x ** 3
    den = 1 + b5 * x + b6 * x ** 2 + b7 * x ** 3
    return {"b1": 1 / den, "b2": x / den, "b3": x ** 2 / den, "b4": x ** 3 / den,
            "b5": -num * x / den ** 2, "b6": -num * x ** 2 / den ** 2, "b7": -num * x ** 3 / den ** 2}


def _mgh17(x, b1, b2, b3, b4, b5):
    return b1 + b2 * np.exp(-x * b4) + b3 * np.exp(-x * b5)


def _mgh17_jac(x, b1, b2, b3, b4, b5):
    e4, e5 = np.exp(-x * b4), np.exp(-x * b5)
    return {"b1": np.ones_like(x), "b2": e4, "b3": e5, "b4": -x * b2 * e4, "b5": -x * b3 * e5}


def _mgh09(x, b1, b2, b3, b4):
    return b1 * (x ** 2 + x * b2) / (x ** 2 + x * b3 + b4)


def _mgh09_jac(x, b1, b2, b3, b4):
    num, den = x ** 2 + x * b2, x ** 2 + x * b3 + b4
    return {"b1": num / den, "b2": b1 * x / den, "b3": -b1 * num * x / den ** 2, "b4": -b1 * num / den ** 2}


def _rat42(x, b1, b2, b3):
    return b1 / (1 + np.exp(b2 - b3 * x))


def _rat42_jac(x, b1, b2, b3):
    e = np.exp(b2 - b3 * x)
    return {"b1": 1 / (1 + e), "b2": -b1 * e / (1 + e) ** 2, "b3": b1 * x * e / (1 + e) ** 2}


def _mgh10(x, b1, b2, b3):
    return b1 * np.exp(b2 / (x + b3))


def _mgh10_jac(x, b1, b2, b3):
    f = b1 * np.exp(b2 / (x + b3))
    return {"b1": f / b1, "b2": f / (x + b3), "b3": -f * b2 / (x + b3) ** 2}


def _eckerle4(x, b1, b2, b3):
    return (b1 / b2) * np.exp(-0.5 * ((x - b3) / b2) ** 2)


def _eckerle4_jac(x, b1, b2, b3):
    g = np.exp(-0.5 * ((x - b3) / b2) ** 2)
    f = b1 / b2 * g
    return {"b1": g / b2, "b2": -f / b2 + f * (x - b3) ** 2 / b2 ** 3, "b3": f * (x - b3) / b2 ** 2}


def _rat43(x, b1, b2, b3, b4):
    return b1 / (1 + np.exp(b2 - b3 * x)) ** (1 / b4)


def _rat43_jac(x, b1, b2, b3, b4):
    e = np.exp(b2 - b3 * x)
    f = b1 / (1 + e) ** (1 / b4)
    share = e / (1 + e)
    return {"b1": f / b1, "b2": -f / b4 * share, "b3": f / b4 * x * share, "b4": f * np.log1p(e) / b4 ** 2}


def _bennett5(x, b1, b2, b3):
    return b1 * (b2 + x) ** (-1 / b3)


def _bennett5_jac(x, b1, b2, b3):
    f = b1 * (b2 + x) ** (-1 / b3)
    return {"b1": f / b1, "b2": -f / (b3 * (b2 + x)), "b3": f * np.log(b2 + x) / b3 ** 2}


def _roszman1(x, b1, b2, b3, b4):
    return b1 - b2 * x - np.arctan(b3 / (x - b4)) / np.pi


def _roszman1_jac(x, b1, b2, b3, b4):
    u = b3 / (x - b4)
    common = 1 / (np.pi * (1 + u ** 2))
    return {"b1": np.ones_like(x), "b2": -x, "b3": -common / (x - b4), "b4": -common * b3 / (x - b4) ** 2}


def _enso(x, b1, b2, b3, b4, b5, b6, b7, b8, b9):
    w, w4, w7 = 2 * np.pi * x / 12, 2 * np.pi * x / b4, 2 * np.pi * x / b7
    return (b1 + b2 * np.cos(w) + b3 * np.sin(w) + b5 * np.cos(w4) + b6 * np.sin(w4)
            + b8 * np.cos(w7) + b9 * np.sin(w7))


def _enso_jac(x, b1, b2, b3, b4, b5, b6, b7, b8, b9):
    w, w4, w7 = 2 * np.pi * x / 12, 2 * np.pi * x / b4, 2 * np.pi * x / b7
    return {"b1": np.ones_like(x), "b2": np.cos(w), "b3": np.sin(w),
            "b4": (b5 * np.sin(w4) - b6 * np.cos(w4)) * w4 / b4, "b5": np.cos(w4), "b6": np.sin(w4),
            "b7": (b8 * np.sin(w7) - b9 * np.cos(w7)) * w7 / b7, "b8": np.cos(w7), "b9": np.sin(w7)}


def _lanczos(x, b1, b2, b3, b4, b5, b6):
    return b1 * np.exp(-b2 * x) + b3 * np.exp(-b4 * x) + b5 * np.exp(-b6 * x)


def _lanczos_jac(x, b1, b2, b3, b4, b5, b6):
    e2, e4, e6 = np.exp(-b2 * x), np.exp(-b4 * x), np.exp(-b6 * x)
    return {"b1": e2, "b2": -b1 * x * e2, "b3": e4, "b4": -b3 * x * e4, "b5": e6, "b6": -b5 * x * e6}


def _gauss(x, b1, b2, b3, b4, b5, b6, b7, b8):
    return b1 * np.exp(-b2 * x) + b3 * np.exp(-(x - b4) ** 2 / b5 ** 2) + b6 * np.exp(-(x - b7) ** 2 / b8 ** 2)


def _gauss_jac(x, b1, b2, b3, b4, b5, b6, b7, b8):
    e2, g1, g2 = np.exp(-b2 * x), np.exp(-(x - b4) ** 2 / b5 ** 2), np.exp(-(x - b7) ** 2 / b8 ** 2)
    return {"b1": e2, "b2": -b1 * x * e2, "b3": g1, "b4": b3 * g1 * 2 * (x - b4) / b5 ** 2,
            "b5": b3 * g1 * 2 * (x - b4) ** 2 / b5 ** 3, "b6": g2, "b7": b6 * g2 * 2 * (x - b7) / b8 ** 2,
            "b8": b6 * g2 * 2 * (x - b7) ** 2 / b8 ** 3}


_FUNCTIONS = {
    "Misra1a": (_misra1a, _misra1a_jac), "BoxBOD": (_misra1a, _misra1a_jac),
    "Chwirut1": (_chwirut, _chwirut_jac), "Chwirut2": (_chwirut, _chwirut_jac),
    "DanWood": (_danwood, _danwood_jac), "Misra1b": (_misra1b, _misra1b_jac),
    "Misra1c": (_misra1c, _misra1c_jac), "Misra1d": (_misra1d, _misra1d_jac),
    "Kirby2": (_kirby2, _kirby2_jac), "Hahn1": (_cubic_ratio, _cubic_ratio_jac),
    "Thurber": (_cubic_ratio, _cubic_ratio_jac), "MGH17": (_mgh17, _mgh17_jac),
    "MGH09": (_mgh09, _mgh09_jac), "Rat42": (_rat42, _rat42_jac), "MGH10": (_mgh10, _mgh10_jac),
    "Eckerle4": (_eckerle4, _eckerle4_jac), "Rat43": (_rat43, _rat43_jac),
    "Bennett5": (_bennett5, _bennett5_jac), "Roszman1": (_roszman1, _roszman1_jac),
    "ENSO": (_enso, _enso_jac), "Lanczos3": (_lanczos, _lanczos_jac), "Gauss1": (_gauss, _gauss_jac),
}


def as_model(data: Certified, *, analytic_jacobian: bool = True) -> Model:
    """The dataset's equation as a gammadot Model record (parameters unbounded)."""
    function, jacobian = _FUNCTIONS[data.name]
    return Model(id=f"nist_{data.name.lower()}", title=data.name, target="shear_stress",
                 parameters=tuple(ModelParameter(n, "1") for n in data.names), function=function,
                 guess=lambda x, y, d=data: d.starts[0], jacobian=jacobian if analytic_jacobian else None)
