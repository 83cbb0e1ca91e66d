"""scikit-learn's estimator contract checks over every manireg estimator.

Source: scikit-learn's ``sklearn.utils.estimator_checks.parametrize_with_checks`` (the generic API suite
scikit-learn runs over its own estimators). A check that cannot apply to an estimator is listed in
``EXPECTED_FAILURES`` with the reason.
"""

from sklearn.utils.estimator_checks import parametrize_with_checks

from manireg.geometry import ChartAtlas, CorrelationDimension, LocalPCADimension, MLEDimension, TwoNNDimension
from manireg.nets import NetworkRegressor

# small neighbourhoods and few bootstrap draws: the checks fit on data sets of 10 to 30 rows
ESTIMATORS = [
    MLEDimension(k_min=3, k_max=5, n_boot=10),
    TwoNNDimension(),
    LocalPCADimension(n_neighbors=5, n_boot=10),
    CorrelationDimension(),
    ChartAtlas(dimension=1, min_points=3, n_neighbors=5),
    NetworkRegressor(max_steps=5, min_steps=0, n_threads=1, random_state=0),
]

# X and y go through manireg's own validation (manireg._validation.check_points / check_target), whose
# messages say what is wrong, what is allowed, what was received and how to fix it in the project's words;
# these checks look for scikit-learn's exact wording (or behaviour of check_array) instead.
_VALIDATION = "X is validated by manireg's check_points, not sklearn's check_array:"
VALIDATION_WORDING = {
    "check_estimators_empty_data_messages": f"{_VALIDATION} it says 'X has no columns', not '0 feature(s)'",
    "check_fit2d_1sample": f"{_VALIDATION} it says 'X has 1 row(s); at least N are needed', not '1 sample'",
    "check_dtype_object": f"{_VALIDATION} a non-numeric entry gives 'X must be numeric', not numpy's wording",
    "check_complex_data": f"{_VALIDATION} complex X is refused with 'would drop the imaginary part', not "
                          "'Complex data not supported'",
}
EXPECTED_FAILURES = {
    "MLEDimension": VALIDATION_WORDING,
    "TwoNNDimension": VALIDATION_WORDING,
    "LocalPCADimension": VALIDATION_WORDING,
    "CorrelationDimension": {
        **VALIDATION_WORDING,
        "check_estimators_dtypes": "on the check's small integer-valued data the 0.1 % and 2 % pair-distance "
                                   "quantiles coincide, and the estimator refuses a zero-width radius range",
    },
    "ChartAtlas": {
        **VALIDATION_WORDING,
        "check_fit2d_1feature": "a tangent/normal split needs dimension < number of features; with one feature "
                                "there is no normal direction, and fit says so",
    },
    "NetworkRegressor": {
        **VALIDATION_WORDING,
        "check_fit2d_predict1d": f"{_VALIDATION} a 1-D X is refused with 'use X.reshape(-1, 1)', not 'Reshape your data'",
        "check_requires_y_none": "y=None is refused by manireg's check_target as 'y must be a 1-D target vector'",
        "check_supervised_y_2d": "manireg's check_target accepts a (n, 1) target column as a vector by design, "
                                 "without a DataConversionWarning",
    },
}


def _expected(estimator):
    return EXPECTED_FAILURES[type(estimator).__name__]


@parametrize_with_checks(ESTIMATORS, expected_failed_checks=_expected)
def test_estimator_contract(estimator, check):
    check(estimator)


def test_regressor_takes_its_training_defaults_from_train_config():
    # NetworkRegressor repeats TrainConfig fields in its signature (scikit-learn reads parameters from it):
    # names and defaults must be TrainConfig's
    import dataclasses
    import inspect

    from manireg.nets.regressor import TRAIN_PARAMS
    from manireg.nets.training import TrainConfig

    defaults = {f.name: f.default for f in dataclasses.fields(TrainConfig)}
    signature = inspect.signature(NetworkRegressor).parameters
    for name in TRAIN_PARAMS:
        assert signature[name].default == defaults[name], name
    assert NetworkRegressor()._config() == TrainConfig()
