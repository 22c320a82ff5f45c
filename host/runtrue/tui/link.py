"""The meter link: a worker thread that owns the MeterClient and only posts messages.

Everything that talks to the meter (open, identify, start/stop, self-test, reading revolutions,
changing weights on a simulated rotor) runs in this one thread, so the interface never waits on
the serial port.  Screens send requests with the methods below; they are queued and carried out
by the thread.  Revolutions are posted in batches at most ``post_interval_s`` apart, so a fast
meter (or a non-realtime simulator) cannot flood the screen.

A pulled cable (``TransportLost``) posts :class:`MeterLost` and the thread keeps trying to open
the same port again every ``retry_s``; the job in the store is never touched by this module.

The thread never dies silently: any other failure inside it (a message the client could not
handle, a bug) is written to the error log (``runtrue.errorlog``), posted as :class:`MeterLost`
with the reason, and the thread opens the port afresh, as after a pulled cable.
"""

from __future__ import annotations

import queue
import threading
import time
from collections.abc import Callable
from typing import Any

from runtrue.tui.messages import CommandFailed, MeterConnected, MeterFailed, MeterLost, RevolutionsRead, SelfTestDone

Poster = Callable[[Any], object]


def _is_link_failure(exc: BaseException) -> bool:
    """A failure of the link (cable pulled, meter silent), as opposed to a bug."""
    from runtrue.device.errors import MeterError
    from runtrue.transport.base import TransportLost

    return isinstance(exc, (TransportLost, MeterError, OSError))


def _is_transport_lost(exc: BaseException) -> bool:
    from runtrue.transport.base import TransportLost

    return isinstance(exc, (TransportLost, OSError))


def _info_dict(info: Any) -> dict[str, Any]:
    raw = getattr(info, "raw", None)
    if raw:
        return dict(raw)
    if isinstance(info, dict):
        return dict(info)
    return {k: v for k, v in vars(info).items() if k != "raw"}


class MeterLink:
    """Owns one meter connection in a background thread.

    ``post`` is called (from the worker thread) with each message; the App passes its own
    ``post_message``.  ``opener(port, seed, realtime)`` returns a MeterClient; it defaults to
    ``runtrue.device.open_meter``.
    """

    def __init__(
        self,
        port: str,
        post: Poster,
        *,
        seed: int | None = None,
        realtime: bool = True,
        opener: Callable[..., Any] | None = None,
        post_interval_s: float = 0.2,
        retry_s: float = 1.0,
        max_revs_per_s: float | None = None,
    ) -> None:
        self.port = port
        self.seed = seed
        self.realtime = realtime
        self._post = post
        self._opener = opener
        self.post_interval_s = post_interval_s
        self.retry_s = retry_s
        # A simulator that is not paced in real time produces revolutions as fast as the CPU
        # allows; this cap keeps it from starving the interface (None = no cap).
        self.max_revs_per_s = max_revs_per_s
        self._requests: queue.Queue[tuple[str, Any]] = queue.Queue()
        self._stop = threading.Event()
        self._streaming = False
        self.client: Any = None
        self.info: dict[str, Any] = {}
        self.connected = False
        self._thread: threading.Thread | None = None
        self._epoch_lock = threading.Lock()
        self._epoch_requested = 0
        self.epoch = 0

    # ---- requests from the interface (any thread) ----
    def start(self) -> None:
        """Start the worker thread (opens the port)."""
        if self._thread is None:
            self._thread = threading.Thread(target=self._run, name=f"meter {self.port}", daemon=True)
            self._thread.start()

    def stream(self, on: bool) -> None:
        self._requests.put(("stream", bool(on)))

    def self_test(self) -> None:
        self._requests.put(("selftest", None))

    def call(self, fn: Callable[[Any], object]) -> int:
        """Run ``fn(client)`` in the worker thread (e.g. change weights on a simulated rotor).

        Returns the epoch that revolutions read after ``fn`` will carry: the revolutions
        already queued are thrown away, so a reading never mixes states of the rotor."""
        with self._epoch_lock:
            self._epoch_requested += 1
            epoch = self._epoch_requested
        self._requests.put(("call", (fn, epoch)))
        return epoch

    def close(self, timeout_s: float = 2.0) -> None:
        self._stop.set()
        if self._thread is not None:
            self._thread.join(timeout_s)
            self._thread = None

    @property
    def latest_epoch(self) -> int:
        """The epoch after every change asked for so far (channels, weights)."""
        with self._epoch_lock:
            return self._epoch_requested

    @property
    def streaming(self) -> bool:
        return self._streaming

    # ---- the worker thread ----
    def _emit(self, message: Any) -> None:
        """Post to the interface, unless this link has been closed (a newer one took over)."""
        if not self._stop.is_set():
            self._post(message)

    def _open(self) -> Any:
        opener = self._opener
        if opener is None:
            from runtrue.device import open_meter

            opener = open_meter
        return opener(self.port, seed=self.seed, realtime=self.realtime)

    def _close_client(self) -> None:
        client, self.client = self.client, None
        self.connected = False
        if client is not None:
            try:
                close = getattr(client, "close", None)
                if close is not None:
                    close()
                else:
                    client.transport.close()
            except Exception:  # noqa: BLE001 - best-effort close of a link that may be gone
                pass

    def _run(self) -> None:
        try:
            self._run_link()
        except BaseException as exc:  # noqa: BLE001 - last resort: the screen must hear of it
            self._emit(MeterLost(self.port, self._unexpected(exc)))
            self.connected = False
        finally:
            self._close_client()

    def _unexpected(self, exc: BaseException) -> str:
        """Log an unexpected failure of the link thread; the reason to show, in one line."""
        from runtrue.errorlog import log_exception, one_line

        where = log_exception(exc, f"meter link {self.port}")
        return f"the link failed unexpectedly ({one_line(exc, 80)}; details in {where})"

    def _run_link(self) -> None:
        ever_connected = False
        while not self._stop.is_set():
            if self.client is None:
                try:
                    self.client = self._open()
                    info = self.client.identify()
                    self.info = _info_dict(info)
                    self.connected = True
                    ever_connected = True
                    if self._streaming:
                        self.client.start()
                    self._emit(MeterConnected(self.port, self.info))
                except Exception as exc:  # noqa: BLE001 - every failure is shown to the user
                    self._close_client()
                    reason = str(exc) or type(exc).__name__
                    self._emit(MeterLost(self.port, reason) if ever_connected else MeterFailed(self.port, reason))
                    if self._stop.wait(self.retry_s):
                        break
                    continue
            try:
                self._serve()
            except Exception as exc:  # noqa: BLE001
                if not _is_link_failure(exc):
                    # Not a pulled cable: log it, say so, and start the link afresh.
                    self._emit(MeterLost(self.port, self._unexpected(exc)))
                    ever_connected = True
                    self._close_client()
                    if self._stop.wait(self.retry_s):
                        break
                    continue
                self._emit(MeterLost(self.port, str(exc) or "the meter stopped answering"))
                if self._reopen_same():
                    continue
                self._close_client()
                if self._stop.wait(self.retry_s):
                    break

    def _reopen_same(self) -> bool:
        """Wait for the same device to come back on its transport (USB serial number or path)."""
        client = self.client
        while not self._stop.is_set():
            try:
                if not client.transport.reopen(self.retry_s):
                    if self.port.startswith("sim:") or "://" in self.port:
                        return False  # cannot come back this way: open afresh
                    continue  # a real port: keep waiting for the same meter
                client.connected = True
                self.info = _info_dict(client.identify())
                client.streaming = False
                if self._streaming:
                    client.start()
                self._emit(MeterConnected(self.port, self.info))
                return True
            except Exception as exc:  # noqa: BLE001
                if not _is_link_failure(exc):
                    self._unexpected(exc)  # logged; opened afresh by the caller
                    return False
        return False

    def _serve(self) -> None:
        """Carry out requests and stream revolutions until stopped or the link fails."""
        batch: list[Any] = []
        last_post = time.monotonic()
        client = self.client
        while not self._stop.is_set():
            try:
                kind, arg = self._requests.get(timeout=0 if self._streaming else 0.05)
            except queue.Empty:
                kind, arg = "", None
            if kind == "stream":
                if arg and not self._streaming:
                    client.start()
                elif not arg and self._streaming:
                    client.stop()
                self._streaming = arg
            elif kind == "selftest":
                was = self._streaming
                try:
                    if was:
                        client.stop()
                    self._emit(SelfTestDone(dict(client.self_test())))
                except Exception as exc:  # noqa: BLE001 - a failed self-test is a result too
                    if _is_transport_lost(exc):
                        raise
                    self._emit(CommandFailed(self.port, "self-test", str(exc)))
                if was:
                    client.start()
            elif kind == "call":
                fn, epoch = arg
                if batch:
                    batch = []  # measured before the change: never mixed into a reading
                try:
                    fn(client)
                except Exception as exc:  # noqa: BLE001 - a refused command is shown, the link stays
                    if _is_transport_lost(exc):
                        raise
                    self._emit(CommandFailed(self.port, getattr(fn, "__name__", "request"), str(exc)))
                finally:
                    discard = getattr(client, "discard_revolutions", None)
                    if discard is not None:
                        discard()
                    self.epoch = epoch
            if self._streaming:
                rev = client.read_revolution(timeout_s=0.1)
                if rev is not None:
                    batch.append(rev)
                    if self.max_revs_per_s:
                        self._stop.wait(1.0 / self.max_revs_per_s)
                now = time.monotonic()
                if batch and (now - last_post >= self.post_interval_s or len(batch) >= 200):
                    self._emit(RevolutionsRead(batch, int(getattr(client, "lost_frames", 0)), self.epoch))
                    batch = []
                    last_post = now
            elif batch:
                self._emit(RevolutionsRead(batch, int(getattr(client, "lost_frames", 0)), self.epoch))
                batch = []
