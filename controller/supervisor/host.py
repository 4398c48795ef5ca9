"""Host readings the supervisor watches besides the instrument: free disk space beside the store."""

from __future__ import annotations

import shutil
from pathlib import Path
from typing import Any, Protocol


class HostMonitor(Protocol):
    def readings(self, store: Any) -> dict[str, float]:
        """Readings such as disk_free_mb; store is the run's Store (with .path) or None."""


class LocalHost:
    """The real machine: free space on the file system that holds the store."""

    def readings(self, store: Any) -> dict[str, float]:
        if store is None:
            return {}
        folder = Path(store.path).resolve().parent
        return {"disk_free_mb": shutil.disk_usage(folder).free / 1e6}
