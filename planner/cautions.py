"""The cautions printed under every plan and written on every plan workbook.

Kept in a module of their own (no imports) so that every command can print them without
loading the report writers.
"""

__all__ = ["CAUTIONS"]

CAUTIONS = [
    "Plans are estimates from the colony's life table, an average of past cohorts; real "
    "batches vary. Check the plan against what the rooms show every day.",
    "Biosafety, irradiation, sterility assurance and release rules are matters for licensed "
    "staff and local codes; this plan does not cover them.",
]
