"""Reports after a night: PNG plots and a short text summary from a store."""
