"""A throwaway TCP forwarder to the database server, to cut and restore a server's database connections."""

from __future__ import annotations

import contextlib
import socket
import threading
from typing import Any


class TcpProxy:
    """A throwaway forwarder from a local port to the database server; ``stop`` drops the listener and
    every forwarded connection (an outage), ``start`` on the same port ends it."""

    def __init__(self, target: tuple[str, int]) -> None:
        self.target = target
        self.port = 0
        self._listener: socket.socket | None = None
        self._sockets: set[socket.socket] = set()
        self._lock = threading.Lock()
        self._threads: list[threading.Thread] = []

    def start(self) -> None:
        listener = socket.socket()
        listener.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
        listener.bind(("127.0.0.1", self.port))
        listener.listen(16)
        listener.settimeout(0.05)
        self.port = listener.getsockname()[1]
        self._listener = listener
        self._spawn(self._accept, listener)

    def stop(self) -> None:
        listener, self._listener = self._listener, None
        for thread in list(self._threads):
            if thread.name == "accept":
                thread.join()
        if listener is not None:
            listener.close()
        with self._lock:
            for sock in self._sockets:
                with contextlib.suppress(OSError):
                    sock.shutdown(socket.SHUT_RDWR)
        for thread in self._threads:
            thread.join()
        self._threads.clear()
        for sock in self._sockets:
            sock.close()
        self._sockets.clear()

    def _spawn(self, target: Any, *args: Any) -> None:
        thread = threading.Thread(target=target, args=args, daemon=True, name=target.__name__.strip("_"))
        self._threads.append(thread)
        thread.start()

    def _accept(self, listener: socket.socket) -> None:
        while self._listener is listener:
            try:
                client, _ = listener.accept()
            except TimeoutError:
                continue
            client.settimeout(None)
            upstream = socket.create_connection(self.target)
            with self._lock:
                self._sockets |= {client, upstream}
            self._spawn(self._pump, client, upstream)
            self._spawn(self._pump, upstream, client)

    def _pump(self, source: socket.socket, sink: socket.socket) -> None:
        with contextlib.suppress(OSError):
            while data := source.recv(65536):
                sink.sendall(data)
        for sock in (source, sink):  # closed by stop(), once no thread uses them
            with contextlib.suppress(OSError):
                sock.shutdown(socket.SHUT_RDWR)
