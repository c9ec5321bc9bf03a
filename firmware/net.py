"""Wi-Fi join on a real board (``network.WLAN``); a no-op where there is no ``network``.

The unix port has no ``network`` module (its sockets use the host's network), so
:func:`joiner` returns a function that does nothing there; on a board with Wi-Fi it
returns one that joins the configured network, waits (feeding the watchdog) and, once
up, sets the clock by NTP when ``ntptime`` is present (for the board's own use: the
replay guard of signed frames counts frames and needs no clock).
"""

try:
    from typing import TYPE_CHECKING
except ImportError:  # MicroPython
    TYPE_CHECKING = False
if TYPE_CHECKING:
    from typing import Any

JOIN_TIMEOUT_MS = 20000


def join(network: "Any", ssid: str, password: "str | None", clock: "Any", idle: "Any",
         timeout_ms: int = JOIN_TIMEOUT_MS) -> bool:
    """Join ``ssid`` through the injected ``network`` module; True when connected.

    Parameters
    ----------
    network : module
        ``network`` (or a stand-in with ``WLAN`` and ``STA_IF``).
    ssid, password : str
        The network to join (password None for an open network).
    clock : object
        ``ticks_ms`` / ``ticks_diff`` / ``sleep_ms``.
    idle : callable
        Run while waiting (feeds the watchdog).
    timeout_ms : int
        Give up after this long, milliseconds (the MQTT link retries later anyway).
    """
    wlan = network.WLAN(network.STA_IF)
    wlan.active(True)
    if wlan.isconnected():
        return True
    if password:
        wlan.connect(ssid, password)
    else:
        wlan.connect(ssid)
    t0 = clock.ticks_ms()
    while not wlan.isconnected():
        if clock.ticks_diff(clock.ticks_ms(), t0) > timeout_ms:
            return False
        clock.sleep_ms(100)
        idle()
    return True


def set_clock() -> bool:
    """Set the real-time clock by NTP where ``ntptime`` exists; True on success."""
    try:
        import ntptime  # type: ignore[import-not-found]
    except ImportError:
        return False
    try:
        ntptime.settime()
        return True
    except (OSError, OverflowError):
        return False


def joiner(wifi: "dict | None", clock: "Any", idle: "Any") -> "Any":
    """A function bringing the network up for the MQTT link (None when not needed)."""
    if wifi is None:
        return None
    try:
        import network  # type: ignore[import-not-found]
    except ImportError:  # the unix port: the host's network is already there
        return None

    def up() -> None:
        if join(network, wifi["ssid"], wifi.get("password"), clock, idle):
            set_clock()

    return up
