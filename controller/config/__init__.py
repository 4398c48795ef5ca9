"""TOML configuration: strict loading into frozen dataclasses."""

from controller.config.loader import load_rig, load_sample, load_sequence, load_site

__all__ = ["load_rig", "load_sample", "load_sequence", "load_site"]
