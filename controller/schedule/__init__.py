"""Schedules: a sequence run again and again on one engine, on slots within daily windows."""
