"""Hardware drivers behind small Protocols, and the simulated instrument."""
