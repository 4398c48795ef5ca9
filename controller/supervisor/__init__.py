"""Interlocks: pure checks (checks.py), coil temperature by measurement (measured.py), the
latched state machine (machine.py), its persistent latch (latch.py) and host readings (host.py)."""
