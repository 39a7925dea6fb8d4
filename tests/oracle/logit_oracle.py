#!/usr/bin/python3
"""logit_oracle.py: writes the reference data and expected values for
tests/test_logistic.c. Run once from the top folder:

    /usr/bin/python3 tests/oracle/logit_oracle.py

Oracle: statsmodels (Debian package python3-statsmodels), discrete.Logit,
used only as a test oracle, never by rowfit. Datasets, both shipped with
statsmodels:
  - spector: Spector & Mazzeo (1980), grades of 32 students;
    GRADE on GPA, TUCE, PSI with an intercept.
  - anes96: the 1996 American National Election Study extract, 944 rows;
    vote (already 0/1) on logpopul, TVnews, selfLR, ClinLR, DoleLR, PID,
    age, educ, income with an intercept.
Writes tests/data/NAME.csv (inputs then target, %.17g, so the doubles read
back exactly) and tests/data/NAME-expected.txt:
    # comment lines
    loglik V
    null_loglik V
    term NAME beta SE
Values at full precision (%.17g). The fit is Newton's method driven to a
step below 1e-14, far past statsmodels' default stopping rule, so the
values carry the digits the data determine rather than the stopping rule's.
"""
import os
import sys
import statsmodels
import statsmodels.api as sm
from statsmodels import datasets

HERE = os.path.dirname(os.path.abspath(__file__))
# The datasets and expected values are written at test time (`make check`
# runs this script) into the folder given as the first argument, not
# committed: the Spector & Mazzeo data are "used with express permission of
# the original author, who retains all rights" (statsmodels' notes), so
# rowfit's repository does not carry a copy.
DATA = sys.argv[1] if len(sys.argv) > 1 else os.path.join(HERE, "..", "data")


os.makedirs(DATA, exist_ok=True)


def write(name, df, xcols, ycol, source):
    X = sm.add_constant(df[xcols].astype(float), prepend=True)
    y = df[ycol].astype(float)
    res = sm.Logit(y, X).fit(method="newton", tol=1e-14, maxiter=200,
                             disp=False)
    with open(os.path.join(DATA, name + ".csv"), "w") as f:
        f.write(",".join(xcols + [ycol]) + "\n")
        for _, row in df.iterrows():
            f.write(",".join("%.17g" % float(row[c]) for c in xcols + [ycol])
                    + "\n")
    with open(os.path.join(DATA, name + "-expected.txt"), "w") as f:
        f.write("# %s; written by tests/oracle/logit_oracle.py\n" % source)
        f.write("# statsmodels %s discrete.Logit, method newton, tol 1e-14;"
                " converged %s in %d iterations\n"
                % (statsmodels.__version__, res.mle_retvals["converged"],
                   res.mle_retvals["iterations"]))
        f.write("loglik %.17g\n" % res.llf)
        f.write("null_loglik %.17g\n" % res.llnull)
        for t, b, s in zip(X.columns, res.params, res.bse):
            f.write("term %s %.17g %.17g\n" % (t, b, s))


write("spector", datasets.spector.load_pandas().data,
      ["GPA", "TUCE", "PSI"], "GRADE",
      "statsmodels.datasets.spector (Spector & Mazzeo 1980)")
write("anes96", datasets.anes96.load_pandas().data,
      ["logpopul", "TVnews", "selfLR", "ClinLR", "DoleLR", "PID", "age",
       "educ", "income"], "vote",
      "statsmodels.datasets.anes96 (1996 American National Election Study)")
