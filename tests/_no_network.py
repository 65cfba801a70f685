"""Pytest plugin: any test that tries to reach the network fails.

Lopside runs on hospital PCs that are often offline, and it must never send what a user
typed anywhere (DESIGN.md section 1). This plugin makes that a property of the test suite:
during every test, opening an internet socket, resolving a host name or calling
``socket.create_connection`` raises :class:`NetworkAccessError`, and the attempt is
recorded, so a test fails even when the code under test swallows the error.

Register it once for the whole suite, in ``pyproject.toml``::

    addopts = "-p _no_network ..."      # with pythonpath = ["tests"] not needed: see below

or from ``tests/conftest.py`` with ``pytest_plugins = ["_no_network"]``.

A test that truly needs the network (none does) is marked ``@pytest.mark.allow_network``.
A test of ``lopside batch`` on a local Dask cluster is marked
``@pytest.mark.loopback_only``: sockets may then be opened, but only to addresses on this
machine (127.0.0.0/8, ::1, "localhost"); any other address still fails the test.
Local-only sockets (``AF_UNIX``, e.g. ``socket.socketpair`` on Linux) are allowed. What a
test starts in a subprocess is not covered (tests/test_offline.py guards its own).
"""

from __future__ import annotations

import socket
from collections.abc import Callable

import pytest

#: Address families that can leave the machine.
_NET_FAMILIES = {socket.AF_INET, getattr(socket, "AF_INET6", socket.AF_INET), -1}


class NetworkAccessError(RuntimeError):
    """Raised when code tries to use the network while it is blocked.

    Not an ``OSError`` on purpose: code that treats ``OSError`` as "offline, carry on"
    must not hide the attempt.
    """


_LOOPBACK_NAMES = {"localhost", "127.0.0.1", "::1", "", None}


def _is_loopback(host) -> bool:
    if isinstance(host, bytes):
        host = host.decode("ascii", "replace")
    if host in _LOOPBACK_NAMES:
        return True
    import ipaddress

    try:
        return ipaddress.ip_address(str(host).split("%")[0]).is_loopback
    except ValueError:
        return False


def block_network(attempts: list[str], *, loopback: bool = False) -> Callable[[], None]:
    """Make every network call in this process raise; return a function that undoes it.

    Parameters
    ----------
    attempts : list of str
        Each attempt is appended here (a short description) before the error is raised.
    loopback : bool
        Allow sockets whose every address is on this machine (loopback); refuse the rest.

    Returns
    -------
    callable
        Restores the real ``socket`` functions.
    """
    real = {
        name: getattr(socket, name)
        for name in (
            "socket",
            "create_connection",
            "getaddrinfo",
            "gethostbyname",
            "gethostbyname_ex",
            "gethostbyaddr",
        )
        if hasattr(socket, name)
    }

    def refuse(what: str):
        attempts.append(what)
        raise NetworkAccessError(f"network access attempted while blocked: {what}")

    class GuardedSocket(real["socket"]):  # type: ignore[misc, valid-type]
        def __init__(self, family=-1, type=-1, proto=-1, fileno=None):
            # fileno given: wrapping an existing (e.g. socketpair) descriptor, not opening
            if fileno is None and family in _NET_FAMILIES and not loopback:
                refuse(f"socket.socket(family={family!r}, type={type!r})")
            super().__init__(family, type, proto, fileno)

        def _check(self, what: str, address) -> None:
            if self.family in _NET_FAMILIES and isinstance(address, tuple):
                if not _is_loopback(address[0]):
                    refuse(f"socket.{what}{address!r}")

        def connect(self, address):
            self._check("connect", address)
            return super().connect(address)

        def connect_ex(self, address):
            self._check("connect_ex", address)
            return super().connect_ex(address)

        def bind(self, address):
            self._check("bind", address)
            return super().bind(address)

        def sendto(self, data, *args):
            self._check("sendto", args[-1])
            return super().sendto(data, *args)

    def guard(name: str):
        def blocked(*args, **kwargs):
            if loopback and args and _is_loopback(args[0]):
                return real[name](*args, **kwargs)
            refuse(f"socket.{name}{args!r}")

        blocked.__name__ = name
        return blocked

    socket.socket = GuardedSocket  # type: ignore[misc]
    for name in real:
        if name != "socket":
            setattr(socket, name, guard(name))

    def undo() -> None:
        for name, fn in real.items():
            setattr(socket, name, fn)

    return undo


def pytest_configure(config: pytest.Config) -> None:
    """Declare the opt-out marker (the suite runs with ``--strict-markers``)."""
    config.addinivalue_line(
        "markers",
        "allow_network: this test may open network connections (Lopside itself never should)",
    )
    config.addinivalue_line(
        "markers",
        "loopback_only: this test may open sockets to this machine only (lopside batch on Dask)",
    )


_ATTEMPTS = pytest.StashKey[list]()
_REPORTED = pytest.StashKey[int]()


def _message(nodeid: str, attempts: list[str]) -> str:
    return (
        f"{nodeid} tried to use the network ({len(attempts)} time(s)); first: {attempts[0]}. "
        "Lopside must work offline."
    )


@pytest.fixture(autouse=True)
def _block_network_during_test(request: pytest.FixtureRequest):
    """Block the network around each test (its set-up, body and tear-down)."""
    if request.node.get_closest_marker("allow_network"):
        yield
        return
    attempts: list[str] = []
    request.node.stash[_ATTEMPTS] = attempts
    undo = block_network(
        attempts, loopback=request.node.get_closest_marker("loopback_only") is not None
    )
    try:
        yield
    finally:
        undo()
    # attempts made in the body are reported with the body (pytest_runtest_makereport);
    # only those made while tearing down are left to report here
    if len(attempts) > request.node.stash.get(_REPORTED, 0):
        pytest.fail(_message(request.node.nodeid, attempts), pytrace=False)


@pytest.hookimpl(hookwrapper=True)
def pytest_runtest_makereport(item: pytest.Item, call: pytest.CallInfo):
    """Fail a test whose body tried the network, even if it caught the error."""
    outcome = yield
    if call.when != "call":
        return
    rep = outcome.get_result()
    attempts = item.stash.get(_ATTEMPTS, None)
    if attempts:
        item.stash[_REPORTED] = len(attempts)
        if rep.passed:
            rep.outcome = "failed"
            rep.longrepr = _message(item.nodeid, attempts)
