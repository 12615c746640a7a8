"""Typed specs of a weighting plan: what to do, apart from the file it is read from.

:func:`skipwise.weighting.plan.load_plan` builds these from the plan file;
the keys are documented in ``docs/weighting.md``.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Mapping

from skipwise.weighting.adjust import DEFAULT_MAX_FACTOR, DEFAULT_MIN_RESPONDENTS
from skipwise.weighting.propensity import DEFAULT_PROPENSITY_CLASSES

__all__ = ["WeightingPlan", "DispositionSpec", "SplitSpec", "NonresponseSpec", "CalibrationSpec",
           "TrimSpec", "ReplicateSpec", "EstimateSpec", "nearest_line"]


def nearest_line(lines: Mapping[tuple, int], path: tuple) -> int | None:
    """Plan-file line of a key path, or of its nearest known parent."""
    while path:
        if path in lines:
            return lines[path]
        path = path[:-1]
    return None


@dataclass(frozen=True, kw_only=True)
class SplitSpec:
    """Complete / partial / break-off from the share of applicable items answered."""

    applies_to: tuple[str, ...] = ("I", "P")
    breakoff_below: float = 0.5
    complete_above: float = 0.8
    breakoff_to: str = "R"


@dataclass(frozen=True, kw_only=True)
class DispositionSpec:
    column: str
    codes: Mapping[str, str]  # normalised disposition label -> outcome category
    split: SplitSpec | None = None
    partials_respond: bool = True


@dataclass(frozen=True, kw_only=True)
class NonresponseSpec:
    method: str = "classes"
    classes: tuple[str, ...] = ()
    min_respondents: int = DEFAULT_MIN_RESPONDENTS
    max_factor: float = DEFAULT_MAX_FACTOR
    covariates: tuple[str, ...] = ()
    categorical: tuple[str, ...] = ()
    propensity_use: str = "inverse"
    propensity_classes: int = DEFAULT_PROPENSITY_CLASSES


@dataclass(frozen=True, kw_only=True)
class CalibrationSpec:
    method: str = "rake"
    margins: Mapping[str, Mapping[Any, float]] = field(default_factory=dict)
    totals: Mapping[str, float] = field(default_factory=dict)
    bounds: tuple[float, float] = (0.5, 2.0)
    tolerance: float = 1e-10
    max_iterations: int = 1000


@dataclass(frozen=True, kw_only=True)
class TrimSpec:
    median_multiple: float | None = None
    percentile: float | None = None
    tolerance: float = 1e-6
    max_iterations: int = 50


@dataclass(frozen=True, kw_only=True)
class ReplicateSpec:
    method: str = "jackknife"
    psu: str | None = None
    strata: str | None = None
    count: int = 200
    seed: int = 12345
    fpc: bool = False
    fraction: str | None = None   # column of the stratum's sampling fraction (default: base probability)


@dataclass(frozen=True, kw_only=True)
class EstimateSpec:
    means: tuple[str, ...] = ()
    proportions: tuple[str, ...] = ()
    exclude_values: tuple[Any, ...] = ()


@dataclass(frozen=True, kw_only=True)
class WeightingPlan:
    """A validated weighting plan; ``lines`` maps key paths to plan-file lines."""

    file: str | None
    dispositions: DispositionSpec
    case_id: str | None = None
    e: float | None = None
    base_probability: str | None = None
    base_weight: str | None = None
    eligibility_classes: tuple[str, ...] | None = None
    nonresponse: NonresponseSpec | None = None
    calibration: CalibrationSpec | None = None
    trimming: TrimSpec | None = None
    replicates: ReplicateSpec | None = None
    estimates: EstimateSpec | None = None
    workbook: str | None = None
    prefix: str = "wt_"
    lines: Mapping[tuple, int] = field(default_factory=dict)

    def line(self, *path: object) -> int | None:
        """Plan-file line of a key path, or of its nearest known parent."""
        return nearest_line(self.lines, tuple(path))

    def locate(self, variable: str, category: object | None) -> dict:
        """Location of a calibration margin (or one of its categories) for problem records."""
        from skipwise.weighting.margins import category_label

        line = None
        if category is not None:
            for key, ln in self.lines.items():
                if key[:3] == ("calibration", "margins", variable) and len(key) == 4 \
                        and category_label(key[3]) == category_label(category):
                    line = ln
        return {"file": self.file, "line": line or self.line("calibration", "margins", variable)}
