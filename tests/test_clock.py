"""The phase clock (derive.clock): every phase reported, exclusive times that add up to the
clocked total, and ``derive record --profile``. No speed is asserted (speed targets live in
benchmarks/bench_families.py); the checks are of bookkeeping only."""
import re
import time

import pytest

import derive
from derive import cli, clock

SHEET = """voltage source Vin between in and gnd = 1 V
resistor R1 between in and a
resistor R2 between a and b
capacitor C1 between a and out
capacitor C2 between b and gnd
opamp U1 inputs b, out output out
port o between out and gnd
find gain from Vin to o
"""


def _busy(seconds):
    end = time.perf_counter() + seconds
    while time.perf_counter() < end:
        pass


def test_nested_phases_are_exclusive_and_add_up():
    c = clock.Clock()
    t = time.perf_counter()
    with clock.running(c):
        with clock.phase("forms"):
            _busy(0.02)
            with clock.phase("solve"):
                _busy(0.02)
            with clock.phase("verification"):
                _busy(0.01)
    outside = time.perf_counter() - t
    assert set(c.wall) == set(clock.PHASES)
    assert c.wall["solve"] >= 0.02 and c.wall["verification"] >= 0.01
    assert c.wall["forms"] >= 0.02
    # exclusive: forms does not include its inner phases, and the sum is the whole block
    assert c.total() <= outside
    assert c.total() == pytest.approx(outside, abs=0.005)
    assert sum(c.shares().values()) == pytest.approx(1.0)


def test_no_clock_running_records_nothing():
    c = clock.Clock()
    with clock.phase("solve"):           # no running clock: nothing charged anywhere
        _busy(0.001)
    assert c.total() == 0.0
    with pytest.raises(ValueError):
        with c.phase("nonsense"):
            pass


def test_a_record_carries_every_phase():
    t = time.perf_counter()
    rec = derive.derive_text(SHEET)
    rec.to_json()
    rec.to_markdown()
    outside = time.perf_counter() - t
    w = rec.clock.wall
    assert list(w) == list(clock.PHASES)
    for p in ("parse", "forms", "verification", "frequency", "export"):
        assert w[p] > 0, p
    assert rec.clock.total() <= outside
    assert rec.clock.total() == pytest.approx(outside, rel=0.05, abs=0.02)
    assert sum(rec.clock.shares().values()) == pytest.approx(1.0)
    d = rec.clock.as_dict()
    assert all(d[p]["cpu"] >= 0 for p in clock.PHASES)


def test_profile_line_on_stderr(tmp_path, capsys):
    sheet = tmp_path / "sk.eqv"
    sheet.write_text(SHEET)
    out = tmp_path / "sk.json"
    assert cli.main(["record", str(sheet), "--format", "json", "-o", str(out),
                     "--profile"]) == 0
    err = capsys.readouterr().err
    line = [x for x in err.splitlines() if x.startswith("derive: phases")][0]
    total = float(re.search(r"share of ([0-9.]+)s", line).group(1))
    got = {m.group(1): (float(m.group(2)), int(m.group(4)))
           for m in re.finditer(r"(\w+) ([0-9.]+)s/([0-9.]+)cpu (\d+)%", line)}
    assert list(got) == list(clock.PHASES)
    assert sum(v[0] for v in got.values()) == pytest.approx(total, abs=0.004)
    assert sum(v[1] for v in got.values()) == pytest.approx(100, abs=len(got))   # rounding
    assert out.exists()
