"""Planning before going to the field: site field, coil design and signal budget (pure, no hardware)."""
