"""What the Python tests that drive a real ogived share: a failure type, a check, a free port.

Imported by scripts run with Debian's /usr/bin/python3 after
    sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "support"))
"""
import socket


class TestFailure(Exception):
    """A failed check; the test prints it and exits 1."""


def check(condition, message):
    if not condition:
        raise TestFailure(message)


def free_port():
    """A loopback TCP port that is free right now."""
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]
