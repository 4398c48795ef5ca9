"""Emulators of the rig hardware, used by tests and rehearsals: a serial board, SCPI instruments."""
