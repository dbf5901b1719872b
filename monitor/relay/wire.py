"""The relay's wire format, pure: topics, endpoints, frames <-> binary data messages, JSON without NaN."""

from __future__ import annotations

import hashlib
import json
import math
from dataclasses import dataclass
from typing import Any, Mapping, Sequence

import numpy as np

from monitor.errors import UsageError

__all__ = ["VERSION", "TOPIC_DATA", "TOPIC_ALARM", "TOPIC_STATUS", "TOPIC_STATE", "TOPIC_ACTION", "TOPIC_PREFIX",
           "relay_endpoint", "request_endpoint", "console_endpoint", "config_fingerprint", "clean",
           "dumps", "encode_columns", "decode_columns", "DataBlock"]

VERSION = 1
TOPIC_PREFIX = b"regime."
TOPIC_DATA = b"regime.data"        # accepted readings, binary columns
TOPIC_ALARM = b"regime.alarm"      # one alarm event and the alarm's view after it
TOPIC_STATUS = b"regime.status"    # the owner's source status changed
TOPIC_STATE = b"regime.state"      # the whole picture: at connect and every interval
TOPIC_ACTION = b"regime.action"    # an operator action from a console: applied or refused
_LOOPBACK = {"127.0.0.1", "localhost", "::1", "[::1]"}


def relay_endpoint(endpoint: str, *, allow_remote: bool = False) -> str:
    """The address the owner binds: ``PORT``/``:PORT`` -> tcp://127.0.0.1:PORT, tcp://HOST:PORT (loopback
    unless ``allow_remote``), ipc://PATH. The same rules as the alarm publisher's address."""
    ep = endpoint.strip()
    if ep.startswith("relay+"):
        ep = ep[len("relay+"):]
    if ep.lstrip(":").isdigit():
        return f"tcp://127.0.0.1:{ep.lstrip(':')}"
    if ep.startswith("ipc://"):
        if len(ep) == len("ipc://"):
            raise UsageError(f"relay endpoint {endpoint!r}: ipc:// needs a path")
        return ep
    if not ep.startswith("tcp://"):
        raise UsageError(f"relay endpoint {endpoint!r}: use tcp://127.0.0.1:PORT, PORT or ipc://PATH")
    host, _, port = ep[len("tcp://"):].rpartition(":")
    if not host or not (port.isdigit() or port == "*"):
        raise UsageError(f"relay endpoint {endpoint!r}: give tcp://HOST:PORT")
    if host not in _LOOPBACK and not allow_remote:
        raise UsageError(f"relay endpoint {endpoint!r} is not loopback; binding beyond this machine must be "
                         "asked for explicitly (--allow-remote)")
    return ep


def request_endpoint(bound: str) -> str:
    """Where the owner takes operator requests, beside the relay's bound address: the next TCP port
    (``tcp://127.0.0.1:*`` when the relay's port was chosen by the system), or ``ipc://PATH.req``."""
    if bound.startswith("ipc://"):
        return bound + ".req"
    host, _, port = bound[len("tcp://"):].rpartition(":")
    return f"tcp://{host}:{int(port) + 1}" if port.isdigit() else f"tcp://{host}:*"


def console_endpoint(spec: str) -> str:
    """``relay+tcp://HOST:PORT`` or ``relay+ipc://PATH`` (the prefix optional) -> the ZeroMQ address."""
    ep = spec.strip()
    if ep.startswith("relay+"):
        ep = ep[len("relay+"):]
    if ep.startswith("ipc://") and len(ep) > len("ipc://"):
        return ep
    if ep.startswith("tcp://"):
        host, _, port = ep[len("tcp://"):].rpartition(":")
        if host and port.isdigit():
            return ep
    raise UsageError(f"relay {spec!r}: give relay+tcp://HOST:PORT or relay+ipc://PATH")


def config_fingerprint(raw: Mapping[str, Any]) -> str:
    """The first 16 hex digits of SHA-256 over the config's TOML as parsed, keys sorted (the same
    envelope gives the same fingerprint whatever its file's layout)."""
    text = json.dumps(raw, sort_keys=True, default=str, separators=(",", ":"))
    return hashlib.sha256(text.encode("utf-8")).hexdigest()[:16]


def clean(value: Any) -> Any:
    """``value`` with every NaN or infinite float as None (strict JSON), tuples as lists, enums by value."""
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, (np.floating, np.integer)):
        return clean(value.item())
    if isinstance(value, dict):
        return {str(k): clean(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [clean(v) for v in value]
    enum_value = getattr(value, "value", None)
    if isinstance(enum_value, str) and not isinstance(value, str):
        return enum_value
    return value


def dumps(obj: Mapping[str, Any]) -> bytes:
    """Strict UTF-8 JSON of ``obj`` (NaN and inf as null)."""
    return json.dumps(clean(dict(obj)), allow_nan=False, separators=(",", ":")).encode("utf-8")


def encode_columns(columns: Sequence[np.ndarray]) -> bytes:
    """One contiguous little-endian float64 column after another (the layout of the binary input batches)."""
    if not columns:
        return b""
    return np.ascontiguousarray(np.vstack([np.asarray(c, dtype="<f8") for c in columns])).tobytes()


@dataclass(frozen=True, eq=False)
class DataBlock:
    """A data message read back: its header and its columns by field name."""

    header: Mapping[str, Any]
    columns: Mapping[str, np.ndarray]

    def __len__(self) -> int:
        return int(self.header["n"])


def decode_columns(header: Mapping[str, Any], payload: bytes | memoryview) -> DataBlock:
    """The columns of a data or state message: ``fields`` x ``n`` float64 values; ValueError when the
    payload does not hold exactly that many."""
    fields = list(header["fields"])
    n = int(header["n"])
    if header.get("dtype", "<f8") != "<f8":
        raise ValueError(f"unsupported dtype {header.get('dtype')!r}")
    arr = np.frombuffer(payload, dtype="<f8")
    if arr.size != n * len(fields):
        raise ValueError(f"payload holds {arr.size} values, header says {len(fields)} fields x {n}")
    block = arr.reshape(len(fields), n) if fields else arr.reshape(0, n)
    return DataBlock(header, {name: block[i] for i, name in enumerate(fields)})
