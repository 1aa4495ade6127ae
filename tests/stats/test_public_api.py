"""The fixed public surface of calcbuilder.stats: names, argument order, result fields.

Checks outside the project call these exactly (issue: foundation), so a rename
or a reordered field must fail here first.
"""

import dataclasses
import inspect

import numpy as np
import pytest

from calcbuilder import stats

FIELDS = {
    "auc_ci": "value se low high",
    "compare_auc": "difference se low high z p_value",
    "roc_points": "thresholds sensitivity specificity",
    "classify": "tp fp tn fn sensitivity specificity ppv npv",
    "youden": "threshold j",
    "calibration_intercept": "value se low high",
    "calibration_slope": "value se low high",
    "calibration_curve": "risk observed",
    "calibration_errors": "ici e50 e90 emax",
    "hosmer_lemeshow": "statistic df p_value",
    "spiegelhalter_z": "statistic p_value",
    "decision_curve": "thresholds model treat_all treat_none interventions_avoided",
    "nri": "events nonevents total se z p_value",
    "continuous_nri": "events nonevents total se z p_value",
    "idi": "value se low high p_value",
    "fit_logistic": "coef cov loglik converged iterations",
    "sample_size_binary": "n events per_parameter criterion",
}
POSITIONAL = {
    "auc": "y risk", "auc_ci": "y risk", "compare_auc": "y risk_a risk_b",
    "roc_points": "y risk", "classify": "y risk threshold", "youden": "y risk",
    "brier": "y risk", "scaled_brier": "y risk", "nagelkerke_r2": "y risk",
    "cox_snell_r2": "y risk", "calibration_intercept": "y risk", "calibration_slope": "y risk",
    "calibration_curve": "y risk", "calibration_errors": "y risk", "hosmer_lemeshow": "y risk",
    "spiegelhalter_z": "y risk", "net_benefit": "y risk thresholds",
    "net_benefit_treat_all": "y thresholds", "decision_curve": "y risk thresholds",
    "nri": "y risk_old risk_new cuts", "continuous_nri": "y risk_old risk_new",
    "idi": "y risk_old risk_new", "fit_logistic": "X y",
    "sample_size_binary": "n_parameters prevalence r2_cs",
}
rng = np.random.default_rng(0)
Y = (rng.random(200) < 0.3).astype(float)
R = np.clip(rng.random(200), 0.01, 0.99)
R2 = np.clip(R + rng.normal(0, 0.1, 200), 0.01, 0.99)
ARGS = {
    "compare_auc": (Y, R, R2), "classify": (Y, R, 0.3), "net_benefit": (Y, R, [0.1, 0.2]),
    "net_benefit_treat_all": (Y, [0.1]), "nri": (Y, R, R2, [0.1, 0.2]),
    "continuous_nri": (Y, R, R2), "idi": (Y, R, R2), "fit_logistic": (R[:, None], Y),
    "sample_size_binary": (10, 0.2, 0.1),
}


@pytest.mark.parametrize("name", sorted(POSITIONAL))
def test_name_is_public_with_fixed_argument_order(name):
    assert name in stats.__all__
    params = [p.name for p in inspect.signature(getattr(stats, name)).parameters.values()
              if p.kind is p.POSITIONAL_OR_KEYWORD]
    assert params == POSITIONAL[name].split()


@pytest.mark.parametrize("name", sorted(FIELDS))
def test_result_is_a_frozen_dataclass_with_the_fixed_fields(name):
    result = getattr(stats, name)(*ARGS.get(name, (Y, R)))
    assert dataclasses.is_dataclass(result)
    with pytest.raises(dataclasses.FrozenInstanceError):
        result.__setattr__(dataclasses.fields(result)[0].name, None)
    names = [f.name for f in dataclasses.fields(result)]
    assert names[: len(FIELDS[name].split())] == FIELDS[name].split()


def test_errors_are_value_errors_of_our_own_class():
    with pytest.raises(stats.StatsInputError) as info:
        stats.auc([0, 1], [0.2])
    assert isinstance(info.value, ValueError)
