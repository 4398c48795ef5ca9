"""One VISA session (pyvisa; pyvisa-py by default) whose every failure is a one-line DriverError.

The transport, apart from any instrument's command words: write, query, query a number in a
range, query a binary block, check the identity, drain the SCPI error queue.  pyvisa-py
reports a refused or broken TCP connection as a bare OSError and a dead server as a
timeout; both become "what, where" messages here.
"""

from __future__ import annotations

import math
import warnings
from typing import Any

import numpy as np

from controller.errors import DriverError

SCPI_OVERLOAD = 9.9e37  # IEEE 488.2 / SCPI: the value an instrument returns for an overload
MAX_ERROR_READS = 10


def _pyvisa() -> Any:
    try:
        import pyvisa
    except ImportError:  # pragma: no cover - pyvisa is a dependency
        raise DriverError("pyvisa is not installed; install precess with its dependencies") from None
    return pyvisa


class VisaSession:
    """A named VISA session; `what` names the instrument in messages (e.g. 'SCPI supply')."""

    def __init__(self, resource: str, backend: str, timeout_s: float, what: str) -> None:
        self.resource = resource
        self.what = what
        self.timeout_s = timeout_s
        pyvisa = _pyvisa()
        self._errors: tuple[type[BaseException], ...] = (pyvisa.errors.Error, OSError, UnicodeDecodeError, ValueError)
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")  # pyvisa-py's notes on optional psutil/zeroconf
                self._rm = pyvisa.ResourceManager(backend)
            self._inst = self._rm.open_resource(resource, read_termination="\n", write_termination="\n",
                                                timeout=int(timeout_s * 1000))
        except self._errors as exc:
            raise DriverError(f"{what} at {resource}: cannot open ({_why(exc)})") from None
        self.closed = False

    def _fail(self, action: str, exc: BaseException) -> DriverError:
        text = _why(exc)
        if "timeout" in text.lower() or "VI_ERROR_TMO" in text:
            return DriverError(f"{self.what} at {self.resource}: no reply to {action!r} within {self.timeout_s:g} s")
        return DriverError(f"{self.what} at {self.resource}: {action!r} failed ({text})")

    def write(self, command: str) -> None:
        if self.closed:
            raise DriverError(f"{self.what} at {self.resource}: session is closed")
        try:
            self._inst.write(command)
        except self._errors as exc:
            raise self._fail(command, exc) from None

    def query(self, command: str) -> str:
        if self.closed:
            raise DriverError(f"{self.what} at {self.resource}: session is closed")
        try:
            reply = self._inst.query(command)
        except self._errors as exc:
            raise self._fail(command, exc) from None
        if not reply.isprintable():
            raise DriverError(f"{self.what} at {self.resource}: unreadable reply {reply[:40]!r} to {command!r}")
        return reply.strip()

    def query_number(self, command: str, low: float, high: float, unit: str) -> float:
        """A numeric reply within [low, high]; garbage, NaN, overload and out-of-range are errors."""
        reply = self.query(command)
        try:
            value = float(reply)
        except ValueError:
            raise DriverError(f"{self.what} at {self.resource}: reply {reply[:40]!r} to {command!r} "
                              "is not a number") from None
        if not math.isfinite(value) or abs(value) >= SCPI_OVERLOAD:
            raise DriverError(f"{self.what} at {self.resource}: {command!r} reads overload ({reply})")
        if not low <= value <= high:
            raise DriverError(f"{self.what} at {self.resource}: {command!r} reads {value:g} {unit}, outside "
                              f"the plausible {low:g} to {high:g} {unit}")
        return value

    def query_block(self, command: str, count: int) -> np.ndarray:
        """An IEEE 488.2 definite-length block of little-endian float32 values."""
        try:
            data = self._inst.query_binary_values(command, datatype="f", is_big_endian=False, container=np.array)
        except self._errors as exc:
            raise self._fail(command, exc) from None
        if data.size != count:
            raise DriverError(f"{self.what} at {self.resource}: {command!r} returned {data.size} values, "
                              f"expected {count}")
        return data

    def check_identity(self, command: str, must_contain: str) -> str:
        ident = self.query(command)
        if must_contain.lower() not in ident.lower():
            raise DriverError(f"{self.what} at {self.resource}: identity {ident[:80]!r} does not contain "
                              f"{must_contain!r} (the rig file's identity check); wrong instrument?")
        return ident

    def check_errors(self, command: str, after: str) -> None:
        """Read the SCPI error queue until '0,...'; any entry is a DriverError naming what preceded it."""
        if not command:
            return
        for _ in range(MAX_ERROR_READS):
            reply = self.query(command)
            code = reply.split(",", 1)[0].strip()
            if code.lstrip("+") == "0":
                return
            if not code.lstrip("+-").isdigit():
                raise DriverError(f"{self.what} at {self.resource}: reply {reply[:40]!r} to {command!r} "
                                  "is not an error-queue entry")
            raise DriverError(f"{self.what} at {self.resource}: instrument error after {after!r}: {reply}")
        raise DriverError(f"{self.what} at {self.resource}: error queue did not empty")

    def close(self) -> None:
        if self.closed:
            return
        self.closed = True
        for thing in (self._inst, self._rm):
            try:
                thing.close()
            except Exception:  # noqa: BLE001 - closing a session that already broke
                pass


def _why(exc: BaseException) -> str:
    text = str(exc).strip()
    return f"{type(exc).__name__}: {text}" if text else type(exc).__name__
