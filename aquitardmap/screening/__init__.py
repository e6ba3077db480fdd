"""Screening: the flagged zones and the logs that look suspicious."""
