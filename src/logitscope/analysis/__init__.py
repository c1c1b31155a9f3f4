"""The analysis layer: pure functions of logit arrays, no widgets.

Every function validates its arguments at the boundary and cites the
published definition it implements.
"""

from ._validation import (
    assume_valid,
    check_labels,
    check_logits,
    check_probabilities,
    check_temperature,
    find_nonfinite_rows,
)
from .calibration import (
    ReliabilityBins,
    classwise_calibration_error,
    expected_calibration_error,
    maximum_calibration_error,
    reliability_bins,
)
from .class_mix import (
    ClassMixCheck,
    ClassMixTest,
    PriorEstimate,
    adjust_to_new_priors,
    class_counts,
    class_mix_check,
    class_mix_test,
    compare_class_mix,
    estimate_priors,
)
from .compare import CheckpointComparison, compare_checkpoints, mcnemar_exact
from .confusion import ConfusedPair, confusion_matrix, most_confused_pairs, normalize_rows, top_k_confusion
from .label_errors import LabelIssueRanking, confident_joint, per_class_thresholds_cl, rank_label_issues
from .metrics import (
    accuracy,
    brier,
    default_ks,
    mean_confidence,
    mean_entropy,
    nll,
    top_k_accuracies,
    top_k_accuracy,
)
from .scores import SCORE_COLUMNS, SampleScores, available_backends, sample_scores, temperature_moments
from .selective import (
    CAUTION,
    RiskCoverage,
    ThresholdChoice,
    aurc,
    binomial_interval,
    evaluate_threshold,
    per_class_thresholds,
    risk_coverage_curve,
    threshold_for_accuracy,
    threshold_for_cost,
)
from .softmax import binary_to_two_column, energy, log_softmax, logsumexp, softmax
from .split import Split, random_split, split_by_values
from .temperature import (
    TemperatureFit,
    TemperatureSweep,
    default_temperature_grid,
    fit_temperature,
    temperature_sweep,
)

__all__ = [
    "CAUTION",
    "SCORE_COLUMNS",
    "CheckpointComparison",
    "ClassMixCheck",
    "ClassMixTest",
    "ConfusedPair",
    "LabelIssueRanking",
    "PriorEstimate",
    "ReliabilityBins",
    "RiskCoverage",
    "SampleScores",
    "Split",
    "TemperatureFit",
    "TemperatureSweep",
    "ThresholdChoice",
    "accuracy",
    "adjust_to_new_priors",
    "assume_valid",
    "aurc",
    "available_backends",
    "binary_to_two_column",
    "binomial_interval",
    "brier",
    "check_labels",
    "check_logits",
    "check_probabilities",
    "check_temperature",
    "class_counts",
    "class_mix_check",
    "class_mix_test",
    "classwise_calibration_error",
    "compare_checkpoints",
    "compare_class_mix",
    "confident_joint",
    "confusion_matrix",
    "default_ks",
    "default_temperature_grid",
    "energy",
    "estimate_priors",
    "evaluate_threshold",
    "expected_calibration_error",
    "find_nonfinite_rows",
    "fit_temperature",
    "log_softmax",
    "logsumexp",
    "maximum_calibration_error",
    "mcnemar_exact",
    "mean_confidence",
    "mean_entropy",
    "most_confused_pairs",
    "nll",
    "normalize_rows",
    "per_class_thresholds",
    "per_class_thresholds_cl",
    "random_split",
    "rank_label_issues",
    "reliability_bins",
    "risk_coverage_curve",
    "sample_scores",
    "softmax",
    "split_by_values",
    "temperature_moments",
    "temperature_sweep",
    "threshold_for_accuracy",
    "threshold_for_cost",
    "top_k_accuracies",
    "top_k_accuracy",
    "top_k_confusion",
]
