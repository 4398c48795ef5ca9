"""Unattended campaigns: a schedule run for days that resumes after kills and device drop-outs."""
