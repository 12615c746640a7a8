"""Skip-aware classification of every (case, item) cell."""

from skipwise.classify import statuses
from skipwise.classify.engine import check_columns, classify
from skipwise.classify.result import Classification, status_categories

__all__ = ["classify", "check_columns", "Classification", "status_categories", "statuses"]
