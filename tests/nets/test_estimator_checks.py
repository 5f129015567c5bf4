"""The estimators against scikit-learn's own estimator checks (source: sklearn.utils.estimator_checks).

Every check of ``parametrize_with_checks`` runs and passes; scikit-learn itself skips the two
array-API checks unless SCIPY_ARRAY_API is set. The estimators do not subclass scikit-learn's
BaseEstimator (labbench must import without scikit-learn), so scikit-learn warns about that once
at collection; the warning is filtered here and nothing else is.
"""

from __future__ import annotations

import warnings

from sklearn.utils.estimator_checks import check_estimator, parametrize_with_checks

from labbench.nets.estimator import NetClassifier, NetRegressor

# Settings that train well on the checks' tiny data sets (tens of rows) in a few milliseconds;
# the defaults (30 epochs at learning rate 1e-3) are meant for real tables and underfit 30 rows.
FAST = dict(hidden=(16,), learning_rate=0.03, batch_size=16, epochs=60, random_state=0)

with warnings.catch_warnings():
    warnings.filterwarnings("ignore", message=".*does not inherit from `sklearn.base.BaseEstimator`")
    _checks = parametrize_with_checks([NetClassifier(**FAST), NetRegressor(**FAST)])


@_checks
def test_sklearn_estimator_checks(estimator, check):
    check(estimator)


def test_check_estimator_as_a_whole():
    for estimator in (NetClassifier(**FAST), NetRegressor(**FAST)):
        with warnings.catch_warnings():
            warnings.filterwarnings("ignore", message=".*does not inherit from `sklearn.base.BaseEstimator`")
            warnings.filterwarnings("ignore", message=".*SCIPY_ARRAY_API is not set")   # skipped by sklearn
            check_estimator(estimator)
