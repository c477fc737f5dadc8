"""Request and response schemas: every user-facing rule (types, ranges, units, cross-field rules).

Imports flow api -> schemas -> solvers, never back.
"""
