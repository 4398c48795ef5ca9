"""Sequences are data: a spec compiles, purely, into a Timeline of frozen events."""
