#!/usr/bin/python3
"""influence_oracle.py: writes the reference data and expected values for
tests/test_diagnose.c (regression diagnostics). Run from the top folder:

    /usr/bin/python3 tests/oracle/influence_oracle.py build/oracle

Oracle: statsmodels (Debian package python3-statsmodels), used only as a
test oracle, never by rowfit:
  - linear: OLS(...).fit().get_influence(), an OLSInfluence:
    hat_matrix_diag, resid_studentized_external, cooks_distance[0];
  - logistic: GLM(..., family=Binomial()).fit().get_influence(), a
    GLMInfluence: hat_matrix_diag, resid_studentized (the Pearson residual
    over sqrt(1 - h)), cooks_distance[0]; and the fit's resid_pearson and
    resid_deviance.
Datasets, all shipped with statsmodels and marked public domain there:
  - longley: Longley (1967), US employment 1947-1962, 16 rows; TOTEMP on
    GNPDEFL, GNP, UNEMP, ARMED, POP, YEAR with an intercept.
  - stackloss: Brownlee's stack loss plant data, 21 rows; STACKLOSS on
    AIRFLOW, WATERTEMP, ACIDCONC, once with an intercept and once without
    (influence-stackloss-origin).
  - anes96: the 1996 American National Election Study extract, 944 rows;
    vote on logpopul, TVnews, selfLR, ClinLR, DoleLR, PID, age, educ,
    income with an intercept (as tests/oracle/logit_oracle.py).
For the linear datasets the same three values are also computed exactly,
in rational arithmetic (Python's fractions module) from their definitions
on the doubles written to the CSV, with only the final square root of the
studentized residual taken in double: statsmodels works in double
precision, and on Longley's ill-conditioned design its own values carry
fewer digits (about 9) than the test asks of rowfit, so there the exact
values are the reference for the digits and statsmodels a second,
independent program.
Writes, into the folder given as the first argument (`make check` and
`make unit` pass $(BUILD)/oracle; nothing is committed):
  influence-NAME.csv           inputs then target, %.17g, so the doubles
                               read back exactly
  influence-NAME-expected.txt  # comment lines
                               model linear|logistic
                               intercept 0|1
                               row H STUDENT COOKS            (linear)
                               exact H STUDENT COOKS          (linear)
                               row H STUDENT COOKS PEARSON DEVIANCE
                                                              (logistic)
one `row` line (statsmodels) and, for linear models, one `exact` line per
data row in order, values %.17g.
The logistic fit is iterated to a relative deviance change of 1e-14, far
past statsmodels' default, so the values carry the digits the data
determine rather than the stopping rule's.
"""
import math
import os
import sys
from fractions import Fraction

import statsmodels
import statsmodels.api as sm
from statsmodels import datasets

HERE = os.path.dirname(os.path.abspath(__file__))
DATA = sys.argv[1] if len(sys.argv) > 1 else os.path.join(HERE, "..", "..",
                                                          "build", "oracle")
os.makedirs(DATA, exist_ok=True)


def write_csv(name, df, xcols, ycol):
    with open(os.path.join(DATA, "influence-%s.csv" % name), "w") as f:
        f.write(",".join(xcols + [ycol]) + "\n")
        for _, row in df.iterrows():
            f.write(",".join("%.17g" % float(row[c]) for c in xcols + [ycol])
                    + "\n")


def exact_influence(X, y):
    """Leverage, externally studentized residual and Cook's distance of
    the least squares fit of y on the columns of X (lists of Fractions),
    exactly: (X'X)^-1 by Gauss-Jordan elimination in rationals, then
    h_i = x_i'(X'X)^-1 x_i, e = y - X b, s^2 = RSS/(n-p),
    s_(i)^2 = (RSS - e_i^2/(1-h_i))/(n-p-1), t_i = e_i/(s_(i) sqrt(1-h_i)),
    D_i = e_i^2 h_i/(p s^2 (1-h_i)^2) (Belsley, Kuh & Welsch 1980;
    Cook 1977)."""
    n, p = len(X), len(X[0])
    M = [[sum(X[i][a] * X[i][b] for i in range(n)) for b in range(p)]
         + [Fraction(int(a == b)) for b in range(p)] for a in range(p)]
    for c in range(p):
        piv = next(r for r in range(c, p) if M[r][c] != 0)
        M[c], M[piv] = M[piv], M[c]
        f = M[c][c]
        M[c] = [v / f for v in M[c]]
        for r in range(p):
            if r != c and M[r][c] != 0:
                g = M[r][c]
                M[r] = [a - g * b for a, b in zip(M[r], M[c])]
    inv = [row[p:] for row in M]
    xty = [sum(X[i][a] * y[i] for i in range(n)) for a in range(p)]
    b = [sum(inv[a][c] * xty[c] for c in range(p)) for a in range(p)]
    e = [y[i] - sum(X[i][a] * b[a] for a in range(p)) for i in range(n)]
    h = [sum(X[i][a] * inv[a][c] * X[i][c] for a in range(p)
             for c in range(p)) for i in range(n)]
    rss = sum(v * v for v in e)
    s2 = rss / (n - p)
    out = [[], [], []]
    for i in range(n):
        s2i = (rss - e[i] ** 2 / (1 - h[i])) / (n - p - 1)
        out[0].append(float(h[i]))
        out[1].append(float(e[i]) / math.sqrt(float(s2i * (1 - h[i]))))
        out[2].append(float(e[i] ** 2 * h[i] / (p * s2 * (1 - h[i]) ** 2)))
    return out


def write_expected(name, source, fitinfo, model, intercept, columns,
                   exact=None):
    with open(os.path.join(DATA, "influence-%s-expected.txt" % name),
              "w") as f:
        f.write("# %s; written by tests/oracle/influence_oracle.py\n"
                % source)
        f.write("# statsmodels %s %s\n" % (statsmodels.__version__, fitinfo))
        f.write("model %s\nintercept %d\n" % (model, intercept))
        for vals in zip(*columns):
            f.write("row " + " ".join("%.17g" % float(v) for v in vals)
                    + "\n")
        for vals in zip(*exact) if exact else []:
            f.write("exact " + " ".join("%.17g" % v for v in vals) + "\n")


def linear(name, df, xcols, ycol, intercept, source):
    X = df[xcols].astype(float)
    if intercept:
        X = sm.add_constant(X, prepend=True)
    y = df[ycol].astype(float)
    inf = sm.OLS(y, X).fit().get_influence()
    write_csv(name, df, xcols, ycol)
    # the doubles of the CSV (%.17g reads back exactly), as fractions
    Xq = [[Fraction(float(v)) for v in row] for row in X.values.tolist()]
    yq = [Fraction(float(v)) for v in y.values.tolist()]
    write_expected(name, source, "OLS get_influence (OLSInfluence)",
                   "linear", intercept,
                   [inf.hat_matrix_diag, inf.resid_studentized_external,
                    inf.cooks_distance[0]], exact_influence(Xq, yq))


def logistic(name, df, xcols, ycol, source):
    X = sm.add_constant(df[xcols].astype(float), prepend=True)
    y = df[ycol].astype(float)
    res = sm.GLM(y, X, family=sm.families.Binomial()).fit(tol=1e-14,
                                                          maxiter=200)
    inf = res.get_influence()
    write_csv(name, df, xcols, ycol)
    write_expected(name, source,
                   "GLM Binomial IRLS tol 1e-14 (%d iterations), "
                   "get_influence (GLMInfluence)"
                   % res.fit_history["iteration"],
                   "logistic", 1,
                   [inf.hat_matrix_diag, inf.resid_studentized,
                    inf.cooks_distance[0], res.resid_pearson,
                    res.resid_deviance])


longley = datasets.longley.load_pandas().data
linear("longley", longley,
       ["GNPDEFL", "GNP", "UNEMP", "ARMED", "POP", "YEAR"], "TOTEMP", 1,
       "statsmodels.datasets.longley (Longley 1967), public domain")
stackloss = datasets.stackloss.load_pandas().data
linear("stackloss", stackloss, ["AIRFLOW", "WATERTEMP", "ACIDCONC"],
       "STACKLOSS", 1,
       "statsmodels.datasets.stackloss (Brownlee 1965), public domain")
linear("stackloss-origin", stackloss, ["AIRFLOW", "WATERTEMP", "ACIDCONC"],
       "STACKLOSS", 0,
       "statsmodels.datasets.stackloss (Brownlee 1965), public domain; "
       "no intercept")
logistic("anes96", datasets.anes96.load_pandas().data,
         ["logpopul", "TVnews", "selfLR", "ClinLR", "DoleLR", "PID", "age",
          "educ", "income"], "vote",
         "statsmodels.datasets.anes96 (1996 American National Election "
         "Study), public domain")
