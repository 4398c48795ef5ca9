"""The simulated instrument: physics, seeded, sharing one virtual clock with the engine."""
