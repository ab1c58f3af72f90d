"""Reference values for forewarn/engine/stationarity.

Library: statsmodels 0.13.5 (Debian python3-statsmodels) with numpy, run by /usr/bin/python3.
Reads the R `datasets` series exported to testdata/datasets/NAME.csv and writes
testdata/py/stationarity_refs.json next to this script. Run from the repository root:

    /usr/bin/python3 testdata/py/stationarity_refs.py
"""
import csv
import json
import math
import os
import warnings

import numpy as np
import statsmodels
from statsmodels.tsa.adfvalues import mackinnoncrit, mackinnonp
from statsmodels.tsa.stattools import adfuller, kpss

HERE = os.path.dirname(os.path.abspath(__file__))
DATA = os.path.join(HERE, "..", "datasets")

# (case name, CSV file, take natural log first)
SERIES = [
    ("Nile", "Nile", False),
    ("LakeHuron", "LakeHuron", False),
    ("lynx", "lynx", False),
    ("logAirPassengers", "AirPassengers", True),
    ("austres", "austres", False),
    ("WWWusage", "WWWusage", False),
]
ADF_LAGS = [0, 1, 4]
KPSS_LAGS = [0, 3, 8, "legacy"]


def load(name):
    with open(os.path.join(DATA, name + ".csv")) as f:
        rows = list(csv.DictReader(f))
    return np.array([float(r["value"]) for r in rows])


def main():
    out = {
        "library": "statsmodels " + statsmodels.__version__ + ", numpy " + np.__version__,
        "adf": [],
        "kpss": [],
        "mackinnonp": [],
        "mackinnoncrit": [],
        "ndiffs": [],
    }
    for case, file, takelog in SERIES:
        x = load(file)
        if takelog:
            x = np.log(x)
        for reg in ("c", "ct"):
            for k in ADF_LAGS:
                stat, p, used, nobs, crit = adfuller(x, maxlag=k, autolag=None, regression=reg)
                out["adf"].append({
                    "series": case, "log": takelog, "regression": reg, "lags": k,
                    "stat": stat, "pvalue": p, "usedlag": used, "nobs": nobs,
                    "crit1": crit["1%"], "crit5": crit["5%"], "crit10": crit["10%"],
                })
            for k in KPSS_LAGS:
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")  # p-value clipped to the table's ends
                    stat, p, used, crit = kpss(x, regression=reg, nlags=k)
                out["kpss"].append({
                    "series": case, "log": takelog, "regression": reg,
                    "nlags": -1 if k == "legacy" else k,
                    "stat": stat, "pvalue": p, "usedlag": used,
                    "crit10": crit["10%"], "crit5": crit["5%"],
                    "crit2_5": crit["2.5%"], "crit1": crit["1%"],
                })
        # Successive level KPSS tests at 5 %, lag truncation int(4 (n/100)^(1/4)) (the l4 of
        # Kwiatkowski et al. 1992), at most two differences: the d at which p >= 0.05 first.
        y, d, pvalues = x, 0, []
        while True:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                _, p, _, _ = kpss(y, regression="c", nlags=int(4 * (len(y) / 100) ** 0.25))
            pvalues.append(p)
            if p >= 0.05 or d == 2:
                break
            y, d = np.diff(y), d + 1
        out["ndiffs"].append({"series": case, "log": takelog, "d": d, "pvalues": pvalues})
    for reg in ("c", "ct"):
        for tau in np.arange(-6.0, 3.01, 0.25):
            out["mackinnonp"].append({"regression": reg, "tau": float(tau),
                                      "pvalue": float(mackinnonp(tau, regression=reg, N=1))})
        for nobs in (20, 50, 100, 500, math.inf):
            c = mackinnoncrit(N=1, regression=reg, nobs=nobs)
            out["mackinnoncrit"].append({"regression": reg,
                                         "nobs": -1 if nobs == math.inf else nobs,
                                         "crit1": c[0], "crit5": c[1], "crit10": c[2]})
    with open(os.path.join(HERE, "stationarity_refs.json"), "w") as f:
        json.dump(out, f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    main()
