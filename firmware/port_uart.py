"""Serial port on a hardware UART, with optional RS-485 driver enable."""

try:
    from typing import TYPE_CHECKING
except ImportError:  # MicroPython
    TYPE_CHECKING = False
if TYPE_CHECKING:
    from typing import Any

READ_CHUNK = 256


class UartPort:
    """A hardware UART; ``de_pin`` (RS-485 driver enable) is high while transmitting.

    Parameters
    ----------
    machine : module
        The ``machine`` module (injected).
    sleep_ms : callable
        Used to poll ``any()`` and to wait out the last byte where ``flush`` is absent.
    """

    def __init__(self, machine: "Any", sleep_ms: "Any", uart_id: int, baud: int,
                 tx: "Any" = None, rx: "Any" = None, de_pin: "Any" = None) -> None:
        kw = {"baudrate": baud}  # type: dict
        if tx is not None:
            kw["tx"] = machine.Pin(tx)
        if rx is not None:
            kw["rx"] = machine.Pin(rx)
        self.uart = machine.UART(uart_id, **kw)
        self.baud = baud
        self.sleep_ms = sleep_ms
        self.de = machine.Pin(de_pin, machine.Pin.OUT, value=0) if de_pin is not None else None

    def read(self, timeout_ms: int) -> bytes:
        waited = 0
        while not self.uart.any():
            if waited >= timeout_ms:
                return b""
            self.sleep_ms(5)
            waited += 5
        return self.uart.read(READ_CHUNK) or b""

    def write(self, data: bytes) -> None:
        if self.de is not None:
            self.de.value(1)
        self.uart.write(data)
        if hasattr(self.uart, "flush"):
            self.uart.flush()  # returns once the last byte left the shift register
        else:
            self.sleep_ms(len(data) * 10000 // self.baud + 2)
        if self.de is not None:
            self.de.value(0)
