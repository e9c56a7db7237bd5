"""The loopback SCPI bench, spoken to over a plain socket (no VISA in between)."""

from __future__ import annotations

import socket
import time

import numpy as np
import pytest

from benchgate.clock import ManualClock
from benchgate.sim.scpi_emulated import EmulatedSupply, definite_block
from benchgate.sim.scpi_instrument_base import QUEUE_LENGTH
from benchgate.sim.scpi_server import ConstantBackend, ScpiBench


class Client:
    def __init__(self, port: int, timeout: float = 1.0):
        self.sock = socket.create_connection(("127.0.0.1", port), timeout=timeout)
        self.sock.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
        self.buf = bytearray()

    def send(self, text: str) -> None:
        self.sock.sendall(text.encode() + b"\n")

    def line(self) -> str:
        while b"\n" not in self.buf:
            chunk = self.sock.recv(65536)
            if not chunk:
                raise ConnectionError("closed")
            self.buf += chunk
        i = self.buf.index(b"\n")
        out = bytes(self.buf[:i]).decode()
        del self.buf[: i + 1]
        return out

    def query(self, text: str) -> str:
        self.send(text)
        return self.line()

    def exact(self, n: int) -> bytes:
        while len(self.buf) < n:
            chunk = self.sock.recv(1 << 20)
            if not chunk:
                raise ConnectionError("closed")
            self.buf += chunk
        out = bytes(self.buf[:n])
        del self.buf[:n]
        return out

    def close(self) -> None:
        self.sock.close()


@pytest.fixture
def bench():
    with ScpiBench(ConstantBackend(), clock=ManualClock()) as b:
        yield b


@pytest.fixture
def supply(bench):
    c = Client(bench.ports["supply"])
    yield c
    c.close()


def test_resources_and_loopback_only(bench):
    assert set(bench.resources) == {"supply", "generator", "dmm", "counter", "digitizer"}
    for role, res in bench.resources.items():
        assert res == f"TCPIP0::127.0.0.1::{bench.ports[role]}::SOCKET"
    for listener in bench._listeners.values():
        assert listener.sock.getsockname()[0] == "127.0.0.1"
    assert len(set(bench.ports.values())) == len(bench.ports) == 5  # supply, generator, dmm, counter, digitizer


def test_identity_and_common_commands(bench, supply):
    # IEEE 488.2 common commands
    assert supply.query("*IDN?") == bench.instruments["supply"].identity
    assert supply.query("*OPC?") == "1"
    supply.send("*OPC")
    assert int(supply.query("*ESR?")) & 0x01  # OPC bit, then cleared by reading
    assert supply.query("*ESR?") == "0"


def test_short_long_forms_case_and_optional_nodes(bench, supply):
    for command, volts in [("SOURce:VOLTage:LEVel:IMMediate:AMPLitude 1.5", 1.5),
                           ("volt 2.5", 2.5), (":sour:volt:lev 3.5", 3.5), ("VoLtAgE 4.5", 4.5)]:
        supply.send(command)
        assert float(supply.query("SOUR:VOLT?")) == volts
    assert supply.query("SYST:ERR?") == '0,"No error"'
    assert supply.query("SYSTem:ERRor:NEXT?") == '0,"No error"'


def test_several_units_in_one_message(bench, supply):
    supply.send("VOLT 9;CURR 0.05;OUTP ON")
    # IEEE 488.2: responses to several queries in one message are separated by ';'
    assert supply.query("VOLT?;CURR?;OUTP?") == "9;0.05;1"
    assert bench.supply_output is True
    assert bench.backend.changes[-1] == (9.0, 0.05, True)


def test_error_codes(bench, supply):
    # SCPI-99 error numbers and texts (from memory where docs/references.md says so)
    cases = [("FOO:BAR 1", -113, "Undefined header"), ("VOLT 31", -222, "Data out of range"),
             ("VOLT", -109, "Missing parameter"), ("*RST 1", -108, "Parameter not allowed"),
             ("VOLT abc", -104, "Data type error"), ("OUTP MAYBE", -224, "Illegal parameter value")]
    for command, code, text in cases:
        supply.send(command)
        reply = supply.query("SYST:ERR?")
        assert reply.startswith(f'{code},"{text}'), (command, reply)
    assert supply.query("SYST:ERR?") == '0,"No error"'
    assert float(supply.query("VOLT?")) == 0.0  # rejected settings changed nothing


def test_unknown_query_gets_no_reply_only_an_error(bench, supply):
    supply.send("MEAS:POWer?")
    assert supply.query("SYST:ERR:COUN?") == "1"
    assert supply.query("SYST:ERR?").startswith("-113,")


def test_event_status_bits(bench, supply):
    supply.send("NOPE")
    supply.send("VOLT 99")
    # IEEE 488.2 ESR: bit 5 command error (32), bit 4 execution error (16)
    assert int(supply.query("*ESR?")) == 32 + 16
    supply.send("*CLS")
    assert supply.query("SYST:ERR?") == '0,"No error"'


def test_queue_overflow(bench, supply):
    for _ in range(QUEUE_LENGTH + 3):
        supply.send("NOPE")
    replies = [supply.query("SYST:ERR?") for _ in range(QUEUE_LENGTH + 1)]
    # SCPI-99: when the queue is full the newest entry is replaced by -350 (from memory)
    assert all(r.startswith("-113,") for r in replies[: QUEUE_LENGTH - 1])
    assert replies[QUEUE_LENGTH - 1] == '-350,"Queue overflow"'
    assert replies[QUEUE_LENGTH] == '0,"No error"'


def test_inject_error(bench, supply):
    bench.inject_error("supply", -310, "System error; fan")
    assert supply.query("SYST:ERR?") == '-310,"System error; fan"'
    with pytest.raises(ValueError):
        bench.inject_error("scope", -100, "x")


def test_reset_switches_output_off(bench, supply):
    supply.send("VOLT 5;OUTP ON")
    assert supply.query("*OPC?") == "1"  # the server has done everything sent before
    assert bench.supply_output is True
    supply.send("*RST")
    assert supply.query("OUTP?") == "0"
    assert bench.supply_output is False
    assert float(supply.query("VOLT?")) == 0.0


def test_digitizer_block_both_byte_orders(bench):
    dig = Client(bench.ports["digitizer"])
    try:
        dig.send("ACQ:SRAT 1e5;ACQ:POIN 100;INIT")
        assert dig.query("*OPC?") == "1"
        expected = ConstantBackend().digitizer_record(1e5, 100)
        for order, dtype in (("NORM", ">f4"), ("SWAP", "<f4")):
            dig.send(f"FORM:BORD {order}")
            dig.send("FETC:WAV?")
            # IEEE 488.2 definite-length block: '#', digit count, length, bytes
            assert dig.exact(2) == b"#3"
            assert dig.exact(3) == b"400"
            data = dig.exact(400)
            assert dig.exact(1) == b"\n"
            np.testing.assert_array_equal(np.frombuffer(data, dtype), expected.astype(np.float32))
    finally:
        dig.close()


def test_fetch_without_acquisition_is_an_error(bench):
    dig = Client(bench.ports["digitizer"])
    try:
        dig.send("FETC:WAV?")
        assert dig.query("SYST:ERR?").startswith('-230,"Data corrupt or stale')
    finally:
        dig.close()


def test_definite_block_header():
    # IEEE 488.2 definite-length arbitrary block
    assert definite_block(b"abc") == b"#13abc"
    assert definite_block(b"x" * 12) == b"#212" + b"x" * 12
    assert definite_block(b"") == b"#10"


def test_faults_slow_drop_garbage(bench):
    # ordered replies instead of timeouts: nothing here depends on how busy the machine is
    dmm = Client(bench.ports["dmm"], timeout=10.0)
    try:
        bench.faults.drop("dmm")
        dmm.send("MEAS:VOLT:DC?")
        # the instrument answers in order: the first line back must be the AC reading
        assert dmm.query("MEAS:VOLT:AC?") == "0.7071"
        bench.faults.garbage("dmm", b"\xff\xfe!\n")
        dmm.send("MEAS:VOLT:DC?")
        assert dmm.exact(4) == b"\xff\xfe!\n"
        assert dmm.line() == "1.25"
        bench.faults.slow("dmm", 0.5)
        t0 = time.monotonic()
        assert dmm.query("MEAS:VOLT:DC?") == "1.25"  # late, but it does come
        assert time.monotonic() - t0 >= 0.5  # a lower bound: load can only add to it
        assert dmm.query("MEAS:VOLT:AC?") == "0.7071"  # the fault was used up
    finally:
        dmm.close()
    with pytest.raises(ValueError):
        bench.faults.slow("scope", 1.0)


def test_two_connections_share_one_instrument(bench):
    a, b = Client(bench.ports["supply"]), Client(bench.ports["supply"])
    try:
        a.send("VOLT 7")
        assert a.query("*OPC?") == "1"
        assert float(b.query("VOLT?")) == 7.0
    finally:
        a.close()
        b.close()


def test_stop_releases_ports():
    b = ScpiBench(ConstantBackend()).start()
    port = b.ports["supply"]
    b.stop()
    with pytest.raises(OSError):
        socket.create_connection(("127.0.0.1", port), timeout=0.2).close()


def test_supply_output_property_reads_emulation(bench):
    supply: EmulatedSupply = bench.instruments["supply"]
    assert bench.supply_output is False
    supply.output = True
    assert bench.supply_output is True


def test_backend_failure_is_queued_not_fatal():
    class Broken(ConstantBackend):
        def counter_frequency(self) -> float:
            raise RuntimeError("model diverged")

    with ScpiBench(Broken()) as b:
        c = Client(b.ports["counter"])
        try:
            c.send("MEAS:FREQ?")
            # SCPI-99: -300 "Device-specific error" (from memory); the connection stays usable
            assert c.query("SYST:ERR?").startswith('-300,"Device-specific error; RuntimeError')
            assert c.query("*IDN?") == b.instruments["counter"].identity
        finally:
            c.close()


def test_error_on_injection_runs_the_command_and_queues_once(bench):
    c = Client(bench.ports["supply"])
    try:
        bench.faults.error_on("supply", "volt", -222, "Data out of range")
        c.send("VOLT 2")
        assert float(c.query("VOLT?")) == 2.0  # the command itself ran
        assert c.query("SYST:ERR?") == '-222,"Data out of range"'
        c.send("VOLT 3")
        assert c.query("SYST:ERR?") == '0,"No error"'  # one use only
    finally:
        c.close()
