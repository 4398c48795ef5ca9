"""Physical models shared by planning, the simulator and the interlocks (one source of truth)."""
