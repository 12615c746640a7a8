"""Questionnaire files (format version 1): typed model, loader and validation."""

from skipwise.questionnaire.loader import load_questionnaire, loads_questionnaire
from skipwise.questionnaire.model import (
    BreakoffSpec, Code, CodeKind, Item, ItemType, Questionnaire, Roster, Section,
)

__all__ = [
    "load_questionnaire", "loads_questionnaire", "Questionnaire", "Section", "Item", "ItemType",
    "Code", "CodeKind", "Roster", "BreakoffSpec",
]
