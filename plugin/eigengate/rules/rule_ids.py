"""The ids of every rule of :mod:`eigengate.rules.catalogue`, for what needs them without the
catalogue: the policy's digest (results cached before a rule was added are not reused) of a
check that the report memo answers. ``tests/test_rules_table.py`` checks that the two agree."""

__all__ = ["RULE_IDS"]

RULE_IDS = (
    "EG001", "EG002", "EG003", "EG004", "EG005", "EG006",
    "EG101", "EG102", "EG103", "EG104", "EG105", "EG106", "EG107", "EG108", "EG109", "EG110",
    "EG111", "EG112", "EG113",
    "EG201", "EG202", "EG203", "EG204", "EG205", "EG206", "EG207", "EG208", "EG209", "EG210",
    "EG211", "EG212", "EG213",
    "EG301", "EG302", "EG303", "EG304", "EG305",
    "EG401", "EG402", "EG403", "EG404",
)
