"""Recommending settings: belt speed and forward power per zone that meet every target with a stated
probability at the least specific energy (or the most throughput), within the line's ratings.

The targets must hold under the fitted parameter uncertainty and the lot-to-lot spread of infeed
temperature and belt load, judged on common Monte Carlo samples; the search is global (a
stratified screen) then local, and every answer is checked on all samples.
"""
from .core import (CAUTION, Recommendation, load_model, recommend, recommend_arguments, recommend_options,
                   recommend_problem, resolve_conditions)
from .plan import PlanEntry, export_recommendations, read_plan
from .practice import RecentPractice, recent_practice_from_samples
from .problem import Conditions, ConditionsSpread, RobustProblem, check_target_consistency
from .search import DenseResult, check_robust, dense_search

__all__ = ["CAUTION", "Conditions", "ConditionsSpread", "DenseResult", "PlanEntry", "RecentPractice", "Recommendation",
           "RobustProblem", "check_robust", "check_target_consistency", "dense_search", "export_recommendations",
           "load_model", "read_plan", "recent_practice_from_samples", "recommend", "recommend_arguments",
           "recommend_options", "recommend_problem", "resolve_conditions"]
